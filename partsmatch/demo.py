"""``partsmatch demo``: the main job end to end on a temporary SQLite catalog of invented data.

Never touches the user's own catalog. Scenario (invented): a 60 Hz countertop oven reaches the
bench of the invented Kestrelby shop with a shorted HV capacitor whose part is sold out.
"""

from __future__ import annotations

import tempfile
from pathlib import Path
from typing import Any, Callable

from partsmatch._resources import data_path

CIRCUIT = "oven_doubler_60hz.toml"
ORIGINAL = "BKM-21-0950-HB"
TRAPS = ("TSL-03KD-U95H", "PMK-E450-1U0")


def run_demo(echo: Callable[[str], None] | None = print, limit: int = 5) -> dict[str, Any]:
    """Run the demo; print as it goes through ``echo`` (None: quiet). Returns the results."""
    from sqlalchemy.orm import Session

    from partsmatch.catalog import db
    from partsmatch.catalog.io import load_demo
    from partsmatch.catalog.queries import find_part
    from partsmatch.circuit.spec import load_circuit
    from partsmatch.report import finding_line, part_summary, stress_lines, verdict_text
    from partsmatch.rules.policy import load_policy
    from partsmatch.substitute import (
        Substitution, crossrefs_for, judge_candidates, verdict_report,
    )

    say = echo or (lambda _s: None)
    with tempfile.TemporaryDirectory(prefix="partsmatch-demo-") as tmp:
        engine = db.make_engine(f"sqlite:///{Path(tmp) / 'demo.db'}")
        try:
            db.init(engine)
            loaded = load_demo(engine)
            spec = load_circuit(data_path("circuits", CIRCUIT))
            policy = load_policy()
            say(f"partsmatch demo — a temporary catalog of {loaded.parts_added} invented parts "
                "(your own catalog is not touched)")
            say(f"A {spec.name!r} reached the bench with a shorted HV capacitor, "
                f"{ORIGINAL}; the shop has none left.\n")
            with Session(engine) as session:
                original = find_part(session, ORIGINAL)
                sub = Substitution(spec, original, "C1", policy)
                say("Stress of every part in its circuit (worst over loaded, no load, switch-on "
                    "and high line; the state that set each value in brackets):")
                for slot, values in sub.base["slots"].items():
                    say(f"  {slot} ({values['role']})")
                    for line in stress_lines(values["role"], values, values.get("states")):
                        say(f"    {line}")
                say("")
                judged = judge_candidates(session, sub)
                report = verdict_report(sub, [j for j in judged if j.verdict != "reject"][:limit],
                                 crossrefs_for(session, original))
                say("Replacements from stock, best first:")
                say(verdict_text(report).split("\n\n", 1)[1].rsplit("\n\nHIGH VOLTAGE", 1)[0])
                traps = []
                for pn in TRAPS:
                    trap = find_part(session, pn)
                    j = sub.judge(trap)
                    traps.append(j.to_dict())
                    say(f"\nA trap: {trap.maker} {trap.part_number} ({part_summary(trap.to_dict())})"
                        f" is {j.verdict.upper()}:")
                    for f in j.findings:
                        if f.status == "fail":
                            say("  " + finding_line(f.to_dict()))
                say("\nHIGH VOLTAGE — before you touch anything:")
                for c in report["cautions"]:
                    say(f"  - {c}")
        finally:
            engine.dispose()
    return {"circuit": spec.to_dict(), "stress": sub.base, "replace": report, "traps": traps}
