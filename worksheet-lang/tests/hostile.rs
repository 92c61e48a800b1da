use std::time::Instant;
use worksheet_lang::{Interrupt, Worksheet};

fn run(label: &str, src: &str) {
    let mut ws = Worksheet::new();
    let t = Instant::now();
    let ex = ws.execute(None, src, &Interrupt::new());
    let r = &ex.report;
    let shown: usize = r.shown.iter().map(|v| format!("{:?}", v).len()).sum();
    let vals: usize = r.values.iter().map(|v| format!("{:?}", v).len()).sum();
    println!("{label}: {:?} diags={:?} shown_bytes={shown} value_bytes={vals}", t.elapsed(),
        r.diagnostics.iter().map(|d| format!("{:?}: {}", d.kind, d.message)).take(3).collect::<Vec<_>>());
}

#[test]
fn explore() {
    let which = std::env::var("EXPLORE").unwrap_or_default();
    if which.contains('a') {
        run("rec8", "f(x) = x\ng(x) = f(x) + f(x)\ny = g(1 V)");
        for d in [10, 14, 16, 18] {
            let mut s = String::from("f0(x) = x\n");
            for i in 1..=d { s += &format!("f{i}(x) = f{}(x) + f{}(x)\n", i-1, i-1); }
            s += &format!("y = f{d}(1 V)\n");
            run(&format!("fanout{d}"), &s);
        }
        run("selfrec", "f(x) = f(x) + 1 V\ny = f(1 V)");
        run("selfrec2", "f(x) = f(x) + f(x)\ny = f(1 V)");
    }
    if which.contains('b') {
        let items: Vec<String> = (0..1000).map(|i| format!("{i} V")).collect();
        let a = format!("a = [{}]", items.join(", "));
        let bs: Vec<&str> = (0..1000).map(|_| "a").collect();
        let b = format!("b = [{}]", bs.join(", "));
        run("list1000", &a);
        run("nested1000x1000", &format!("{a}\n{b}"));
    }
    if which.contains('c') {
        for n in [100, 400, 1000] {
            let mut s = String::new();
            for i in 0..n { s += &format!("given g{i} = 1 V ± 1 %\n"); }
            let sum: Vec<String> = (0..n).map(|i| format!("g{i}")).collect();
            s += &format!("t = {}\n", sum.join(" + "));
            run(&format!("givens{n}"), &s);
        }
    }
    if which.contains('d') {
        for n in [1000, 100000] {
            run(&format!("parens{n}"), &format!("x = {}1 V{}", "(".repeat(n), ")".repeat(n)));
            run(&format!("neg{n}"), &format!("x = {}1 V", "-".repeat(n)));
            run(&format!("pow{n}"), &format!("x = {}2", "2^".repeat(n)));
        }
    }
}
