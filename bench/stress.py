"""Wall time of one steady-state solve: partsmatch's engine against ngspice, in the same run.

    python bench/stress.py [--repeat N] [--ngspice-repeat M]

For each demo circuit in data/circuits/*.toml, and for a lightly loaded clamp doubler with a
10 Mohm bleeder and 1 H of leakage inductance, prints the median wall time of:

* ``engine``: ``partsmatch.circuit.stress.steady_state(spec, load=True)``, one verified periodic
  steady state of the loaded circuit (the unit issue 3's target is stated in);
* ``analyze``: the whole ``analyze`` (loaded, no-load, high line, switch-on, fuse opening);
* ``ngspice``: ``tests/ngspice_ref.simulate`` on an equivalent netlist written from the agreed
  wiring text: ngspice-39 in batch mode, started from the closed-form capacitor voltages, run to
  a periodic steady state (settle runs plus a three-period measure run with the period-to-period
  check), process start-up and file I/O included. It is the cheapest way this reference gets
  ngspice to steady state, not the time ngspice takes from discharged capacitors (for the lightly
  loaded doubler that is the bleeder's seconds of settling; ``--from-zero`` times that too).

Also printed: the load's mean voltage from both, as a check that the two solved the same circuit.
"""

from __future__ import annotations

import argparse
import glob
import importlib.util
import os
import statistics
import sys
import time
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _ngspice_ref():
    spec = importlib.util.spec_from_file_location("ngspice_ref", ROOT / "tests" / "ngspice_ref.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("ngspice_ref", mod)
    spec.loader.exec_module(mod)
    return mod


LIGHT_DOUBLER = {
    "name": "lightly loaded doubler, 10 Mohm bleeder (bench)",
    "topology": "half-wave-doubler",
    "source": {"voltage": "2000 V", "frequency": "60 Hz", "resistance": "50 ohm", "inductance": "1 H"},
    "load": {"type": "resistor", "resistance": "200 Mohm"},
    "parts": {"C1": {"capacitance": "1 uF", "bleeder": "10 Mohm"},
              "D1": {"forward_voltage": "10 V", "resistance": "20 ohm"}},
}


def _median_time(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times), out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7, help="engine repetitions (median)")
    ap.add_argument("--ngspice-repeat", type=int, default=3, help="ngspice repetitions (median)")
    ap.add_argument("--from-zero", action="store_true",
                    help="also time ngspice from discharged capacitors for 600 periods (slow)")
    args = ap.parse_args(argv)

    from partsmatch.circuit.spec import parse_circuit
    from partsmatch.circuit.stress import analyze, steady_state

    ref = _ngspice_ref()
    have = ref.have_ngspice()
    version = ref.ngspice_version() if have else "ngspice missing"
    cases: list[tuple[str, dict]] = []
    for path in sorted(glob.glob(str(ROOT / "data" / "circuits" / "*.toml"))):
        with open(path, "rb") as fh:
            cases.append((os.path.basename(path), tomllib.load(fh)))
    cases.append(("light_doubler_10Mohm (bench)", LIGHT_DOUBLER))

    print(f"partsmatch steady-state solve vs {version}; medians of {args.repeat} (engine) and "
          f"{args.ngspice_repeat} (ngspice) runs")
    head = (f"{'circuit':34s} {'engine ms':>10s} {'periods':>8s} {'analyze ms':>11s} "
            f"{'ngspice ms':>11s} {'ngs/eng':>8s} {'load V eng':>11s} {'load V ngs':>11s}")
    print(head)
    print("-" * len(head))
    for name, data in cases:
        spec = parse_circuit(data, source=name)
        t_eng, (net, wiring, ss) = _median_time(lambda: steady_state(spec, load=True), args.repeat)
        t_an, rep = _median_time(lambda: analyze(spec), max(1, args.repeat // 3))
        v_eng = rep["by_state"]["loaded"]["load"]["v_mean"]
        kw = {"settle_periods": 200} if data.get("topology") == "multiplier" else {}
        if data.get("topology") == "half-wave-doubler" and ref.from_data(data).freq > 10e3:
            kw["options"] = ref.OPTION_LADDER[1:]   # gear stalls on the 30 kHz doubler
        if have:
            t_ng, res = _median_time(lambda: ref.simulate(data, **kw), args.ngspice_repeat)
            v_ng = res.values["load"]["v_mean"]
            ng = f"{t_ng * 1e3:11.0f} {t_ng / t_eng:7.0f}x {v_eng:11.1f} {v_ng:11.1f}"
        else:
            ng = f"{'-':>11s} {'-':>8s} {v_eng:11.1f} {'-':>11s}"
        periods = getattr(ss, "periods", float("nan"))
        print(f"{name[:34]:34s} {t_eng * 1e3:10.1f} {periods!s:>8s} {t_an * 1e3:11.0f} {ng}")
    if args.from_zero and have:
        r = ref.from_data(LIGHT_DOUBLER)
        T = r.period
        t = time.perf_counter()
        res = ref.simulate(LIGHT_DOUBLER, ic={"C1": 0.0}, settle_periods=600, max_rounds=1,
                           settle_tol=1.0)
        dt = time.perf_counter() - t
        print(f"ngspice from discharged C1, 600 periods ({600 * T:.0f} s simulated): "
              f"{dt * 1e3:.0f} ms, load {res.values['load']['v_mean']:.1f} V")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
