"""Measurement: the compiled kernel with float32 inner loops, beside the production float64 kernel.

Issue 15 asks whether float32 inner loops would keep the accuracy targets (1e-4 against the independent
numpy oracle, tests/oracle_canopy.py; 0.5 % against the 96-step reference integration) and what they
would gain. This script builds a float32 variant of the kernel for MEASUREMENT ONLY; production stays
float64 (suitability/kernel/).

How the variant is built, without re-typing any equation: the kernel is compiled from the physiology's
own definitions by re-binding their globals (suitability.physiology.elementwise). Here the same
re-binding goes one step further: every float constant in the code of the kernel's templates, of the
equations and of the compiled scalar operations (``ops``) becomes a numpy float32 (numba types it as
float32, where a Python float is float64 and would promote every float32 operand it meets), float
globals and float tuples likewise, ``math``/``np`` attributes that are floats (pi, inf, nan) too; the
kernel's stack buffers are bound to float32 ones (``compiled._stack_array(rows, float32)``), the table
lookup's row/fraction split to one that keeps the fraction float32 (``compiled._table_row``: float32
minus an integer is float64 in numba), and the tables and every float argument are passed as float32. Outputs stay float64 arrays. The entry point is
compiled afresh (no disk cache) so that its assembly can be read: packed-single (``ps``) against
packed-double (``pd``) arithmetic shows how much of the loops really runs in float32.

Then, in one process on the same invented cells: accuracy of both kernels as benchmarks/run.py measures
it (kernel_accuracy), and one-thread throughput measured alternately. Results go to
benchmarks/results/float32.json and float32.md.

Usage: python benchmarks/float32.py [--cells 131072] [--repeats 5]
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
import types
from datetime import datetime, timezone
from pathlib import Path
from unittest import mock

import numba
import numpy as np

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from benchmarks.run import _run_kernel, kernel_accuracy, machine, packed_arithmetic_by_register  # noqa: E402
from benchmarks.synthetic import cell_inputs  # noqa: E402
from suitability import kernel  # noqa: E402
from suitability.kernel import compiled as kernel_compiled  # noqa: E402
from suitability.physiology import elementwise, scalar_ops  # noqa: E402

RESULTS = REPO / "benchmarks" / "results"
FLOAT32 = numba.types.float32


def _single(value):
    """A float, or a tuple of floats, as numpy float32 (which numba types as float32)."""
    if type(value) is float:
        return np.float32(value)
    if type(value) is tuple and value and all(type(v) is float for v in value):
        return tuple(np.float32(v) for v in value)
    return value


def _single_code(code: types.CodeType) -> types.CodeType:
    consts = tuple(_single_code(c) if isinstance(c, types.CodeType) else _single(c) for c in code.co_consts)
    return code.replace(co_consts=consts)


class Float32Builder:
    """Re-binds the kernel's templates, the equations and the scalar operations for float32 (module
    docstring); each function is converted once."""

    def __init__(self, bindings: dict):
        self.bindings = bindings
        self.done: dict[int, object] = {}
        self.modules: dict[str, types.ModuleType] = {}
        self.ops = self._module_view(scalar_ops)

    def _module_view(self, module):
        if module.__name__ not in self.modules:
            view = types.ModuleType(module.__name__ + "_float32")
            view.__getattr__ = lambda name: self.convert(getattr(module, name))
            self.modules[module.__name__] = view
        return self.modules[module.__name__]

    def _function(self, function, options: dict, bound: bool = False):
        namespace = dict(function.__globals__)
        namespace["ops"] = self.ops
        for name in function.__code__.co_names:
            if bound and name in self.bindings:
                namespace[name] = self.convert(self.bindings[name])
            elif name in namespace:
                namespace[name] = self.convert(namespace[name])
        clone = types.FunctionType(_single_code(function.__code__), namespace, function.__name__ + "_float32",
                                   tuple(_single(d) for d in function.__defaults__ or ()) or None,
                                   function.__closure__)
        clone.__qualname__ = function.__qualname__ + "_float32"
        clone.__module__ = function.__module__
        return numba.njit(**options)(clone)

    def convert(self, value):
        if not (callable(value) or isinstance(value, types.ModuleType)):
            return _single(value)
        key = id(value)  # functions and modules live as long as the run; each is converted once
        if key in self.done:
            return self.done[key]
        # co_names also holds attribute names (``math.exp`` lists "exp", the name of scalar_ops.exp itself):
        # a function met again while it is being converted keeps its own value.
        self.done[key] = value
        if isinstance(value, types.ModuleType):
            result = self._module_view(value) if value.__name__ in ("math", "numpy") else value
        elif getattr(value, "__suitability_template__", False):
            result = self._function(value, dict(inline="always", **elementwise.JIT_OPTIONS), bound=True)
        elif elementwise.is_equation(value):
            result = self._function(value, dict(inline="always", **elementwise.JIT_OPTIONS))
        elif isinstance(value, numba.core.registry.CPUDispatcher):
            result = self._function(value.py_func, dict(value.targetoptions))
        else:
            result = _single(value)
        self.done[key] = result
        return result

    def entry(self):
        """The float32 entry point (``monthly_cells``), compiled on first call, not cached on disk."""
        return self._function(kernel_compiled.monthly_cells, dict(elementwise.JIT_OPTIONS), bound=True)


@numba.njit(inline="always", **elementwise.JIT_OPTIONS)
def _table_row_float32(position, last_row):
    """compiled._table_row with a float32 fraction (float32 minus an integer is float64 in numba)."""
    row = min(max(int(math.floor(position)), 0), last_row)
    return row, position - np.float32(row)


def float32_entry(c3_model, c4_model):
    c = kernel_compiled
    bindings = {"_table_row": _table_row_float32, "C3_RATES": c3_model.rates, "C4_RATES": c4_model.rates, "C3_ACCLIMATE": c3_model.acclimate,
                "C4_ACCLIMATE": c4_model.acclimate,
                "_setup_array": c._stack_array(c._N_SETUP, FLOAT32), "_cell_array": c._stack_array(c._N_CELL, FLOAT32),
                "_acc_array": c._stack_array(c._N_ACC, FLOAT32), "_moment_array": c._stack_array(c._N_MOMENT, FLOAT32)}
    return Float32Builder(bindings).entry()


class _Float32Call:
    """Calls the float32 entry with every float input as float32 (the two output arrays, the last two
    arguments, stay float64)."""

    def __init__(self, entry):
        self.entry = entry

    def __call__(self, *args):
        *inputs, daily, totals = args
        converted = [np.ascontiguousarray(a, np.float32) if isinstance(a, np.ndarray) and a.dtype == np.float64
                     else np.float32(a) if type(a) is float else a for a in inputs]
        return self.entry(*converted, daily, totals)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=131072)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--out", type=Path, default=RESULTS)
    args = parser.parse_args()
    results = {"created": datetime.now(timezone.utc).isoformat(timespec="seconds"), "machine": machine()}
    cells = cell_inputs(args.cells)
    small = {k: v[:64] for k, v in cells.items()}

    start = time.perf_counter()
    _run_kernel(small)
    results["float64_first_call_s"] = round(time.perf_counter() - start, 1)

    c3 = kernel.pathway_tables("C3", None)
    c4 = kernel.pathway_tables("C4", None)
    single = _Float32Call(float32_entry(c3.model, c4.model))

    def run_single(part):
        with mock.patch.object(kernel, "compiled_entry", lambda *models: single):
            return _run_kernel(part)

    start = time.perf_counter()
    run_single(small)
    results["float32_compile_s"] = round(time.perf_counter() - start, 1)
    asm = single.entry.inspect_asm(single.entry.signatures[0])
    results["float32_packed_single"] = packed_arithmetic_by_register(asm, "ps")
    results["float32_packed_double"] = packed_arithmetic_by_register(asm, "pd")
    results["float32_scalar_double"] = sum(1 for line in asm.splitlines()
                                           if line.split()[:1] and line.split()[0].endswith("sd")
                                           and not line.split()[0].startswith("vmov"))

    accuracy_cells = {k: v[:max(2048, args.cells // 8)] for k, v in cells.items()}
    results["float64_accuracy"] = kernel_accuracy(_run_kernel, accuracy_cells)
    results["float32_accuracy"] = kernel_accuracy(run_single, accuracy_cells)
    double_result = _run_kernel(accuracy_cells)
    single_result = run_single(accuracy_cells)
    results["float32_vs_float64_max_relative_to_gross"] = {
        field: float(np.nanmax(np.abs(getattr(single_result, field) - getattr(double_result, field))
                               / np.maximum(np.abs(getattr(double_result, "c3_gross" if field.startswith("c3")
                                                                  else "c4_gross")), 1e-12)))
        for field in ("c3_net", "c3_gross", "c3_photorespiration", "c4_net", "c4_gross")}

    double_s = single_s = math.inf
    for _ in range(args.repeats):  # alternately, so that both see the same load
        start = time.perf_counter()
        _run_kernel(cells)
        double_s = min(double_s, time.perf_counter() - start)
        start = time.perf_counter()
        run_single(cells)
        single_s = min(single_s, time.perf_counter() - start)
    results["cells"] = args.cells
    results["float64_cell_steps_per_s"] = args.cells * 12 / double_s
    results["float32_cell_steps_per_s"] = args.cells * 12 / single_s
    results["float32_over_float64"] = double_s / single_s
    args.out.mkdir(parents=True, exist_ok=True)
    (args.out / "float32.json").write_text(json.dumps(results, indent=2) + "\n")
    (args.out / "float32.md").write_text(markdown(results))
    print(markdown(results))


def _accuracy_cells(accuracy: dict) -> list[str]:
    oracle = accuracy["max_difference_kernel_vs_oracle_relative_to_gross"]
    reference = accuracy["max_relative_error_of_gross_vs_96_step_reference"]
    fields = ("c3_net", "c3_gross", "c3_photorespiration", "c4_net", "c4_gross")
    return ([f"{oracle[f]:.1e}" for f in fields] + [str(all(oracle[f + "_nan_pattern_equal"] for f in fields))]
            + [f"{reference[p] * 100:.3f} %" for p in ("C3", "C4")])


def markdown(r: dict) -> str:
    single, double = r["float32_packed_single"], r["float32_packed_double"]
    lines = [
        f"# float32 inner loops, measured {r['created']}",
        "",
        f"Machine: {r['machine']['cpu']}, {r['machine']['cores']} cores; load average at start "
        f"{r['machine']['load_average_at_start']}; {r['machine']['simd']}. Invented inputs (benchmarks/synthetic.py). "
        "Made by benchmarks/float32.py: a MEASUREMENT; production stays float64.",
        "",
        "## Accuracy (targets: 1e-4 of gross against the oracle, 0.5 % against the 96-step reference)",
        "",
        "| kernel | C3 net | C3 gross | C3 photoresp. | C4 net | C4 gross | NaN pattern equal | C3 gross vs 96-step | "
        "C4 gross vs 96-step |",
        "|---|---|---|---|---|---|---|---|---|",
        "| float64 (production) | " + " | ".join(_accuracy_cells(r["float64_accuracy"])) + " |",
        "| float32 inner loops | " + " | ".join(_accuracy_cells(r["float32_accuracy"])) + " |",
        "",
        "float32 against float64 on the same cells, largest difference relative to gross: "
        + ", ".join(f"{f} {v:.1e}" for f, v in r["float32_vs_float64_max_relative_to_gross"].items()) + ".",
        "",
        f"## Speed (one thread, {r['cells']} cells x 12 months, best of alternate runs in one process)",
        "",
        "| kernel | cell-steps/s | ratio to float64 |",
        "|---|---|---|",
        f"| float64 (production) | {r['float64_cell_steps_per_s'] / 1e6:.2f} M | 1.00 |",
        f"| float32 inner loops | {r['float32_cell_steps_per_s'] / 1e6:.2f} M | {r['float32_over_float64']:.2f} |",
        "",
        f"float32 entry point: packed-single arithmetic by register {single}, packed-double {double}, scalar "
        f"double instructions {r['float32_scalar_double']}; compiled in {r['float32_compile_s']} s (float64 first call, "
        f"compile or cache load: {r['float64_first_call_s']} s).",
        "",
        "Not covered here: the other model pairs, parameter overrides, the humidity inputs other than e = e°(Tmin), "
        "per-cell growth temperatures (tests/test_kernel.py's matrix). A behaviour difference seen in the "
        "conversion: the input checks' open upper bound 1e300 (canopy.valid_day_inputs) is inf in float32, so the "
        "float32 variant would accept an infinite input that float64 rejects.",
        "",
    ]
    return "\n".join(lines)


if __name__ == "__main__":
    main()
