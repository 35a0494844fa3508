"""``nullfit demo``: the whole job on the bundled (invented) demo data."""

from __future__ import annotations


def add_parser(sub) -> None:
    d = sub.add_parser("demo", help="the whole job on the bundled (invented) demo data")
    d.add_argument("--data", metavar="DIR", help="demo data folder (default: the bundled data_demo)")
    d.add_argument("-o", "--out", metavar="DIR", default="nullfit-demo",
                   help="output folder for figures and report (default ./nullfit-demo)")
    d.add_argument("--force", action="store_true", help="overwrite an existing output folder's files")
    d.add_argument("--seed", type=int, default=20261201, help="random seed (recorded)")
    d.add_argument("--no-output", action="store_true", help="print the summary only; write no files")


def run(args) -> int:
    from ..output.demo import run_demo

    return run_demo(data=args.data, out=None if args.no_output else args.out, force=args.force, seed=args.seed)
