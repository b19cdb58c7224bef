"""Human-readable reports of verdicts and stress (plain text; the JSON is the library's dicts)."""

from __future__ import annotations

from typing import Any

from partsmatch.units import format_quantity as q  # "-" for a missing value

#: Stress keys per role with their units, in display order.
STRESS_UNITS = {
    "capacitor": (("v_peak", "V"), ("v_min", "V"), ("v_max", "V"), ("v_mean", "V"), ("v_ac_rms", "V"),
                  ("i_rms", "A"), ("energy_j", "J"), ("discharge_s", "s")),
    "diode": (("v_reverse_peak", "V"), ("i_avg", "A"), ("i_peak", "A"), ("i_rms", "A"),
              ("i_surge", "A"), ("i2t_surge", "A2s"), ("surge_s", "s"), ("frequency_hz", "Hz")),
    "fuse": (("i_rms", "A"), ("i_peak", "A"), ("i2t_cycle", "A2s"), ("i2t_surge", "A2s"),
             ("v_open_peak", "V"), ("v_open_rms", "V")),
}
LOAD_UNITS = (("v_mean", "V"), ("v_peak", "V"), ("i_mean", "A"), ("p_mean", "W"))


def part_summary(p: dict[str, Any]) -> str:
    """Main ratings of a part dict (PartRecord.to_dict or a candidate's ``ratings``)."""
    r = p.get("ratings", p)
    bits: list[str] = []
    if r.get("capacitance"):
        bits.append(q(r["capacitance"], "F"))
    if r.get("tolerance_minus") is not None:
        tm, tp = r.get("tolerance_minus"), r.get("tolerance_plus")
        bits.append(f"±{tm:g}%" if tm == tp else f"-{tm:g}/+{tp:g}%")
    if r.get("voltage_ac"):
        bits.append(q(r["voltage_ac"], "V") + " AC")
    if r.get("voltage_dc"):
        bits.append(q(r["voltage_dc"], "V") + " DC")
    if r.get("polarized"):
        bits.append("polarised")
    if r.get("bleeder"):
        bits.append("bleeder " + q(r["bleeder"], "ohm"))
    for key, unit, label in (("vrrm", "V", "VRRM"), ("if_avg", "A", "IF"), ("trr", "s", "trr")):
        if r.get(key):
            bits.append(f"{label} {q(r[key], unit)}")
    if r.get("rated_current"):
        bits.append(" ".join(x for x in (r.get("characteristic") or "",
                                         q(r["rated_current"], "A")) if x))
    if r.get("voltage"):
        bits.append(q(r["voltage"], "V"))
    if r.get("breaking_capacity"):
        bits.append("Icn " + q(r["breaking_capacity"], "A"))
    if r.get("fuse_standard"):
        bits.append(r["fuse_standard"])
    if r.get("size"):
        bits.append(r["size"])
    return " ".join(bits)


def stress_lines(role: str, values: dict[str, Any], states: dict[str, str] | None = None
                 ) -> list[str]:
    out = []
    for key, unit in STRESS_UNITS.get(role, ()):
        if values.get(key) is None:
            continue
        where = f"  ({states[key].replace('_', ' ')})" if states and key in states else ""
        out.append(f"{key:<15} {q(values[key], unit):>10}{where}")
    return out


def finding_line(f: dict[str, Any]) -> str:
    unit = f.get("unit") or ""
    nums = []
    if f.get("stress") is not None and unit:
        nums.append(f"stress {q(f['stress'], unit)}")
    if f.get("rating") is not None and unit:
        nums.append(f"rating {q(f['rating'], unit)}")
    if f.get("margin") is not None:
        nums.append(f"margin {f['margin']:.2f}")
    tail = f" [{', '.join(nums)}]" if nums else ""
    return f"{f['status']:<4} {f['rule']}: {f['message']}{tail}"


def verdict_text(report: dict[str, Any], *, show_passes: bool = False) -> str:
    """The human output of ``replace`` and ``check``."""
    lines: list[str] = []
    orig = report["original"]
    lines.append(f"circuit: {report['circuit']}  ({report.get('circuit_file', '')})")
    lines.append(f"slot {report['slot']}, original {orig['maker']} {orig['part_number']}: "
                 f"{part_summary(orig)}")
    lines.append(f"policy: {report['policy']}")
    role = orig["kind"]
    lines.append("stress in the slot (worst over the operating states; the state in brackets):")
    lines += ["  " + s for s in stress_lines(role, report["stress"],
                                            report["stress"].get("states"))]
    load = report.get("load") or {}
    if load:
        lines.append("  load: " + ", ".join(f"{k} {q(load.get(k), u)}" for k, u in LOAD_UNITS
                                            if load.get(k) is not None))
    if report.get("crossrefs"):
        lines.append("the shop's recorded cross-references for this original:")
        for x in report["crossrefs"]:
            note = f" — {x['note']}" if x.get("note") else ""
            lines.append(f"  {x['relation']}: {x['part']} ({(x.get('recorded_at') or '')[:10]})"
                         f"{note}")
    cands = report["candidates"]
    lines.append("")
    if not cands:
        lines.append("no candidate in the catalog passes (use --all to see the rejected ones)")
    for n, c in enumerate(cands, 1):
        stock = ", ".join(f"{s['location']} ({s['quantity']})" for s in c["locations"]
                          if s["quantity"] > 0) or "none in stock"
        lines.append(f"{n:>2}. {c['verdict'].upper():<7} score {c['score']:>3}  {c['maker']} "
                     f"{c['part_number']}: {part_summary(c)}")
        lines.append(f"      stock: {stock}"
                     + (f"; re-simulated at {', '.join(c['resimulated'])}"
                        if c.get("resimulated") else ""))
        shown = [f for f in c["findings"] if show_passes or f["status"] != "pass"]
        for f in shown:
            lines.append("      " + finding_line(f))
        if not shown:
            lines.append("      every rule passes")
    judged = report.get("judged")
    if judged:
        more = f"; {judged['not_shown']} more not shown (--limit)" if judged["not_shown"] else ""
        lines.append(f"judged {judged['candidates']} candidates: {judged['accept']} accept, "
                     f"{judged['caution']} caution, {judged['reject']} reject{more}")
    lines.append("")
    lines.append("HIGH VOLTAGE — before you touch anything:")
    lines += [f"  - {c}" for c in report["cautions"]]
    return "\n".join(lines)
