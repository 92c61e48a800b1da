"""The jupyter_kernel_test conformance suite, filled in with Headroom worksheet code.

Every message the suite receives is checked with its own schema validators.

Left out, because the language has no such statement by design (a worksheet is a pure
calculation: no printing, no pager, no clearing of outputs):
- code_hello_world (stdout): nothing in a worksheet writes to stdout; results are shown as
  result blocks and execute results, warnings go to stderr (code_stderr below).
- code_page_something (pager payload): inspection is answered through inspect_request
  (code_inspect_sample below), not by running code.
- code_clear_output: a cell's block is replaced through its display id, never cleared.
"""

from __future__ import annotations

import jupyter_kernel_test

from conftest import KERNEL_NAME


class HeadroomKernelTests(jupyter_kernel_test.KernelTests):
    kernel_name = KERNEL_NAME
    language_name = "headroom"
    file_extension = ".hrw"

    # A bare expression shows its value as the execute result: 2 V × 3 = 6 V, written with
    # three significant digits (the language's display rule).
    code_execute_result = [
        {"code": "2 V * 3", "result": "6.00 V"},
        {"code": "12 V / 4", "result": "3.00 V"},
        # 1 kΩ ∥ 1 kΩ = 500 Ω (two equal resistors in parallel halve).
        {"code": "1 kΩ || 1 kΩ", "result": "500 Ω"},
    ]

    # Each cell shows its result block as display_data with all three MIME types.
    code_display_data = [
        {"code": "given vin = 12 V", "mime": "text/plain"},
        {"code": "given iload = 180 mA ± 20 %", "mime": "text/html"},
        {"code": "p = 5 V * 100 mA", "mime": "application/vnd.headroom.results+json"},
    ]

    # A unit mistake is an error whose traceback carries the caret excerpt.
    code_generate_error = "x = 12 V + 3 A"

    # A built-in's warning is written to stderr as well: 5.5 V in, 5 V out with 1 V of
    # dropout leaves -0.5 V of headroom, so the regulator is in dropout.
    code_stderr = "u9 = reg.linear(5.5 V, vout: 5 V, iout: 100 mA, dropout: 1 V)"

    completion_samples = [
        # Members of a built-in namespace (they replace what follows the dot).
        {"text": "reg.", "matches": {"linear", "switching"}},
        # Any prefix at all gets a well-formed reply.
        {"text": "zz"},
    ]

    complete_code_samples = ["x = 1 V", "given vin = 10.8 V .. 13.2 V", "check 1 V < 2 V", ""]
    # A statement continues while a bracket is open or the line ends with an operator/comma.
    incomplete_code_samples = ["x = (1 V +", "u = reg.linear(vin,", "y = 2 V *"]
    # An unmatched closing bracket can never become valid by adding lines.
    invalid_code_samples = ["x = 1 V)", "y = ]"]

    # Matches "2 V * 3" among code_execute_result.
    code_history_pattern = "2 V *"
    supported_history_operations = ("tail", "range", "search")

    code_inspect_sample = "reg.linear"
