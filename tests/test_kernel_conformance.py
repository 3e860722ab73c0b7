"""Conformance of the icefield kernel with the Jupyter messaging protocol, checked by
the reference suite `jupyter_kernel_test` (Jupyter project, PyPI), which validates every
message against the message-spec v5 schemas it ships.
"""

from __future__ import annotations

import unittest

import jupyter_kernel_test

from helpers import MODEL, run_cell

# A table every sample below can show or plot (invented parameters).
SETUP = MODEL + "\nthermo = scan T at [1, 2, 4] K, sweeps = 50, equilibrate = 20"


class IcefieldKernelTests(jupyter_kernel_test.KernelTests):
    kernel_name = "icefield"
    language_name = "icefield"
    file_extension = ".ifld"

    @classmethod
    def setUpClass(cls) -> None:
        super().setUpClass()
        reply, _ = run_cell(cls.kc, SETUP)
        assert reply["status"] == "ok", reply

    # rhai's print goes to the cell's stdout stream.
    code_hello_world = 'rhai { print("hello, world") }'

    completion_samples = [
        {"text": "measure specific_h", "matches": {"specific_heat", "specific_heat_molar"}},
        {"text": "lattice pyro", "matches": {"pyrochlore"}},
        # workspace names complete too
        {"text": "show ther", "matches": {"thermo"}},
    ]

    complete_code_samples = [
        "measure energy",
        'rhai { print("x") }',
        "lattice pyrochlore L = 2",
    ]
    # An open rhai block, an open bracket, a trailing comma continue the statement.
    incomplete_code_samples = [
        "rhai {",
        "thermo2 = scan T at [1, 2",
        "measure energy,",
    ]
    # A closing bracket that was never opened can never become valid.
    invalid_code_samples = ["}", "measure energy)"]

    # Two plots: the first is a display_data, the last the cell's execute_result.
    code_display_data = [
        {
            "code": "plot thermo.energy against T\nplot thermo.specific_heat against T",
            "mime": "image/svg+xml",
        },
    ]

    code_execute_result = [
        {"code": "plot thermo.energy against T", "mime": "image/svg+xml"},
        {"code": "show thermo", "mime": "text/html"},
    ]
    supported_history_operations = ("tail", "range", "search")
    # Full-string glob, as history search uses: only `show thermo` matches.
    code_history_pattern = "show th?rmo"

    code_generate_error = "show no_such_table"

    code_inspect_sample = "specific_heat"


if __name__ == "__main__":
    unittest.main()
