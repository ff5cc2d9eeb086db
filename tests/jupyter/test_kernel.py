"""The stagna kernel against jupyter_kernel_test, with every test it offers enabled."""

import unittest

import jupyter_kernel_test as jkt


class StagnaKernelTests(jkt.KernelTests):
    kernel_name = "stagna"
    language_name = "rhai"
    file_extension = ".rhai"

    code_hello_world = 'print("hello, world")'
    code_stderr = 'eprint("check the gauge zero")'

    completion_samples = [
        {"text": "pitot_sta", "matches": {"pitot_static"}},
        {"text": "let p = pitot_static(1.0); p.veloc", "matches": {"velocity"}},
    ]
    complete_code_samples = ["1 + 1", "let a = [1, 2];", "fn f(x) {\n  x * 2\n}"]
    incomplete_code_samples = ["let a = [1,", "fn f(x) {", 'print("open']
    invalid_code_samples = ["1)", "let a = ]"]

    code_page_something = "?water"
    code_generate_error = "wter()"

    code_execute_result = [
        {"code": "6 * 7", "result": "42"},
        {"code": "64.mm", "result": "64 mm"},
        # 3 inH2O at 60 °F = 746.52 Pa (NIST SP 811 B.8: 248.84 Pa per inH2O at 60 °F)
        {"code": 'qty("3 inH2O@60F").to("Pa")', "result": "746.5 Pa"},
    ]
    code_display_data = [
        {"code": "display(traverse_layout(round_section(1.m), #{points: 4}).chart())", "mime": "image/svg+xml"},
        {"code": 'display(table_from(#{h: [1.0]}).unit("h", "mm"))', "mime": "text/html"},
    ]

    code_history_pattern = "6 * ?"
    supported_history_operations = ("tail", "range", "search")

    code_inspect_sample = "water"
    code_clear_output = "clear_output()"


if __name__ == "__main__":
    unittest.main()
