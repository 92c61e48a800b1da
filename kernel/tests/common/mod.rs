//! Worksheet text shared by the kernel's integration tests.

/// Functions f0 … f10, each calling the one below it twice: f10 makes 1 024 calls. A sweep of
/// ten million points over f10 runs for seconds however fast plain sweeps get, so a test can
/// interrupt it while it runs. A macro, so that `concat!` can splice it into a cell.
macro_rules! doubling_functions {
    () => {
        concat!(
            "f0(p) = p\n",
            "f1(p) = f0(p) + f0(p)\n",
            "f2(p) = f1(p) + f1(p)\n",
            "f3(p) = f2(p) + f2(p)\n",
            "f4(p) = f3(p) + f3(p)\n",
            "f5(p) = f4(p) + f4(p)\n",
            "f6(p) = f5(p) + f5(p)\n",
            "f7(p) = f6(p) + f6(p)\n",
            "f8(p) = f7(p) + f7(p)\n",
            "f9(p) = f8(p) + f8(p)\n",
            "f10(p) = f9(p) + f9(p)\n",
        )
    };
}
