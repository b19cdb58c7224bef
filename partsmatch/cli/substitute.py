"""Commands: replace, check, repairs add|list, policy show, demo."""

from __future__ import annotations

import csv
import sys
from pathlib import Path

import typer

from partsmatch.cli.common import emit_json, globals_of, print_table

repairs_app = typer.Typer(help="The repair log: substitutions made, with their verdicts.",
                          no_args_is_help=True)
policy_app = typer.Typer(help="The shop policy: every limit the rules use, and its source.",
                         no_args_is_help=True)


def _deciding(c: dict) -> str:
    bad = [f for f in c["findings"] if f["status"] == "fail"] or \
        [f for f in c["findings"] if f["status"] == "warn"]
    return "; ".join(f"{f['rule']}: {f['message']}" for f in bad)


def replace(
    ctx: typer.Context,
    part: str = typer.Argument(None, help="The original: PART or MAKER:PART (or use "
                               "--original-spec, or --slot of a slot that names its part)."),
    circuit: Path = typer.Option(..., "--circuit", help="Circuit file (TOML)."),
    slot: str = typer.Option(None, "--slot", help="Slot of the circuit (C1, D1, F1 ...)."),
    original_spec: str = typer.Option(None, "--original-spec",
                                      help="Ratings or marking of an original not in the "
                                      "catalog, e.g. \"0.95uF 2100VAC 3%\"."),
    in_stock: bool = typer.Option(False, "--in-stock", help="Only parts in stock."),
    show_all: bool = typer.Option(False, "--all", help="Also list rejected parts with reasons."),
    limit: int = typer.Option(10, "--limit", min=0, help="At most this many candidates "
                              "(0: all)."),
    json_out: bool = typer.Option(False, "--json", help="Print the verdicts as JSON."),
) -> None:
    """Rank the catalog's substitutes for a failed part, checked against its circuit's stress."""
    from sqlalchemy.orm import Session

    from partsmatch.circuit.spec import load_circuit
    from partsmatch.report import verdict_text
    from partsmatch.substitute import replace_part, resolve_original

    g = globals_of(ctx)
    spec = load_circuit(circuit)
    policy = g.load_policy()
    with Session(g.engine()) as session:
        original, slot_name = resolve_original(session, spec, part, original_spec, slot)
        report = replace_part(session, spec, original, slot=slot_name, policy=policy,
                              in_stock=in_stock, include_rejected=show_all, limit=limit or None)
    if json_out:
        emit_json(report)
    else:
        typer.echo(verdict_text(report))


def _check_one(session, spec, policy, original_name, candidate_name, slot, cache=None):
    from partsmatch.catalog.queries import find_part
    from partsmatch.substitute import check_part, resolve_original

    original, slot_name = resolve_original(session, spec, original_name, None, slot)
    candidate = find_part(session, candidate_name)
    return check_part(session, spec, original, candidate, slot=slot_name, policy=policy,
                      cache=cache)


def check(
    ctx: typer.Context,
    original: str = typer.Argument(None, help="The original part (PART or MAKER:PART)."),
    candidate: str = typer.Argument(None, help="The offered substitute."),
    circuit: Path = typer.Option(..., "--circuit", help="Circuit file (TOML)."),
    slot: str = typer.Option(None, "--slot", help="Slot of the circuit (C1, D1, F1 ...)."),
    batch: Path = typer.Option(None, "--batch", help="CSV of proposals: columns original, "
                               "candidate and optionally slot."),
    strict: bool = typer.Option(False, "--strict", help="Exit 1 on caution too."),
    json_out: bool = typer.Option(False, "--json", help="Print the verdicts as JSON."),
    csv_out: bool = typer.Option(False, "--csv", help="With --batch: one CSV row per proposal."),
) -> None:
    """Check an offered substitute against the original in a circuit (exit 1 if rejected)."""
    from sqlalchemy.orm import Session

    from partsmatch.circuit.spec import load_circuit
    from partsmatch.errors import InputError, PartNotFound
    from partsmatch.report import verdict_text

    g = globals_of(ctx)
    spec = load_circuit(circuit)
    policy = g.load_policy()
    bad = {"reject"} | ({"caution"} if strict else set())
    with Session(g.engine()) as session:
        if batch is None:
            if not (original and candidate):
                raise InputError("check needs ORIGINAL and CANDIDATE, or --batch FILE")
            report = _check_one(session, spec, policy, original, candidate, slot)
            if json_out:
                emit_json(report)
            else:
                typer.echo(verdict_text(report, show_passes=True))
                typer.echo(f"\nverdict: {report['verdict'].upper()}")
            if report["verdict"] in bad:
                raise typer.Exit(1)
            return
        rows = _batch_rows(batch)
        cache: dict = {}
        results = []
        for line, row in rows:
            try:
                rep = _check_one(session, spec, policy, row["original"], row["candidate"],
                                 row.get("slot") or slot, cache)
            except (InputError, PartNotFound) as exc:  # an unknown part names its row too
                raise exc.located(file=str(batch), line=line) from None
            cand = rep["candidates"][0]
            results.append({"line": line, "original": row["original"],
                            "candidate": row["candidate"], "slot": rep["slot"],
                            "verdict": rep["verdict"], "reasons": _deciding(cand),
                            "findings": cand["findings"]})
    if json_out:
        emit_json(results)
    elif csv_out:
        w = csv.writer(sys.stdout, lineterminator="\n")
        w.writerow(["original", "candidate", "slot", "verdict", "reasons"])
        for r in results:
            w.writerow([r["original"], r["candidate"], r["slot"], r["verdict"], r["reasons"]])
    else:
        print_table(["line", "original", "candidate", "slot", "verdict", "deciding findings"],
                    [[str(r["line"]), r["original"], r["candidate"], r["slot"],
                      r["verdict"].upper(), r["reasons"][:100]] for r in results])
    if any(r["verdict"] in bad for r in results):
        raise typer.Exit(1)


def _batch_rows(path: Path) -> list[tuple[int, dict]]:
    from partsmatch.errors import InputError

    try:
        fh = open(path, newline="", encoding="utf-8-sig")
    except OSError as exc:
        raise InputError(f"cannot read the file: {exc.strerror}", file=str(path)) from None
    with fh:
        reader = csv.DictReader(fh)
        header = [h.strip().lower() for h in (reader.fieldnames or [])]
        for col in ("original", "candidate"):
            if col not in header:
                raise InputError("the header lacks this column", file=str(path), line=1,
                                 column=col)
        unknown = [h for h in header if h not in ("original", "candidate", "slot", "note")]
        if unknown:
            raise InputError("unknown column", file=str(path), line=1, column=unknown[0])
        reader.fieldnames = header
        out = []
        for row in reader:
            line = reader.line_num
            row = {k: (v or "").strip() for k, v in row.items() if k}
            for col in ("original", "candidate"):
                if not row.get(col):
                    raise InputError("a value is required", file=str(path), line=line,
                                     column=col)
            out.append((line, row))
    return out


@repairs_app.command("add")
def repairs_add(
    ctx: typer.Context,
    original: str = typer.Argument(..., help="The part that failed (PART or MAKER:PART)."),
    substitute: str = typer.Argument(..., help="The part fitted instead."),
    circuit: Path = typer.Option(..., "--circuit", help="Circuit file (TOML)."),
    slot: str = typer.Option(None, "--slot", help="Slot of the circuit."),
    note: str = typer.Option(None, "--note", help="Free text (job number, customer...)."),
    json_out: bool = typer.Option(False, "--json", help="Print the record as JSON."),
) -> None:
    """Record a substitution that was made, with its verdict at the time."""
    from sqlalchemy.orm import Session

    from partsmatch.catalog.queries import find_part
    from partsmatch.catalog.repairs import add_repair
    from partsmatch.circuit.spec import load_circuit

    g = globals_of(ctx)
    spec = load_circuit(circuit)
    engine = g.engine()
    with Session(engine) as session:
        report = _check_one(session, spec, g.load_policy(), original, substitute, slot)
        orig = find_part(session, original)
        sub = find_part(session, substitute)
    rec = add_repair(engine, circuit=f"{spec.name} ({circuit})", slot=report["slot"],
                     original=orig, substitute=sub, verdict=report["verdict"],
                     snapshot={k: report[k] for k in ("slot", "policy", "version", "stress",
                                                      "candidates")}, note=note)
    if json_out:
        emit_json(rec)
    else:
        typer.echo(f"recorded repair {rec['id']}: {rec['original']} -> {rec['substitute']} in "
                   f"{rec['slot']} ({rec['verdict']})")


@repairs_app.command("list")
def repairs_list(
    ctx: typer.Context,
    part: str = typer.Option(None, "--part", help="Repairs naming this part."),
    circuit: str = typer.Option(None, "--circuit", help="Repairs of circuits matching this."),
    limit: int = typer.Option(None, "--limit", min=1, help="At most this many."),
    json_out: bool = typer.Option(False, "--json", help="Print as JSON."),
) -> None:
    """List recorded repairs, newest first."""
    from sqlalchemy.orm import Session

    from partsmatch.catalog.queries import find_part
    from partsmatch.catalog.repairs import list_repairs

    engine = globals_of(ctx).engine()
    rec = None
    if part:
        with Session(engine) as session:
            rec = find_part(session, part)
    rows = list_repairs(engine, part=rec, circuit=circuit, limit=limit)
    if json_out:
        emit_json(rows)
        return
    print_table(["id", "when", "circuit", "slot", "original", "substitute", "verdict", "note"],
                [[str(r["id"]), (r["at"] or "")[:16], r["circuit"][:40], r["slot"], r["original"],
                  r["substitute"], r["verdict"] or "", r["note"] or ""] for r in rows])


@policy_app.command("show")
def policy_show(ctx: typer.Context,
                json_out: bool = typer.Option(False, "--json", help="Print as JSON.")) -> None:
    """Print the policy values in force and where each came from."""
    from partsmatch.units import format_quantity

    policy = globals_of(ctx).load_policy()
    if json_out:
        emit_json({"files": policy.files, "values": policy.as_dict()})
        return
    rows = []
    for v in policy:
        shown = format_quantity(v.value, v.unit) if v.unit else f"{v.value:g}"
        origin = "default" if v.origin == "default" else Path(v.origin).name
        rows.append([v.name, shown, v.kind, origin, v.source[:90]])
    print_table(["name", "value", "kind", "from", "source"], rows)


def demo(json_out: bool = typer.Option(False, "--json", help="Print the results as JSON.")
         ) -> None:
    """The main job end to end on a temporary catalog of invented demo data."""
    from partsmatch.demo import run_demo

    result = run_demo(echo=None if json_out else typer.echo)
    if json_out:
        emit_json(result)


def register(app: typer.Typer) -> None:
    app.command("replace")(replace)
    app.command("check")(check)
    app.add_typer(repairs_app, name="repairs")
    app.add_typer(policy_app, name="policy")
    app.command("demo")(demo)
