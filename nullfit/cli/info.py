"""``nullfit info LOG``: what a log holds (turns, marks, dropped rows, gaps, direction changes)."""

from __future__ import annotations

from .options import log_inputs, print_json, read_log, scan_options, with_provenance


def add_parser(sub) -> None:
    i = sub.add_parser("info", help="read a scan log and print what it holds")
    i.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    scan_options(i, aux=True)
    i.add_argument("--json", action="store_true", help="print one JSON object")


def run(args) -> int:
    from ..campaign.facts import reading_facts, reading_notes, reading_rows
    from ..core.render import Summary

    scan = read_log(args)
    facts = reading_facts(scan)
    if args.json:
        d = scan.to_dict()
        d.update(facts)
        print_json(with_provenance(d, inputs=log_inputs(args)))
        return 0
    s = scan.summary()
    known = {r[0] for r in s.rows}
    rows = tuple(r for r in s.rows if r[0] != "dropped rows")
    rows += tuple(r for r in reading_rows(facts) if r[0] not in known)
    own = tuple(n for n in s.notes if not n.startswith(("dropped ", "the table changed direction")))
    mine = reading_notes(facts)
    if any("gap" in n for n in own):  # the reader reports gaps itself
        mine = tuple(n for n in mine if not n.startswith("gap in time"))
    notes = tuple(dict.fromkeys(own + mine))
    from .wording import to_user_text

    print(to_user_text(Summary(s.title, rows, notes, s.sections).as_text()))
    return 0
