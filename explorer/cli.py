"""Command line: ``python -m explorer check DATA --response Y --factor A``."""

from __future__ import annotations

import argparse
import sys

from .core import ExplorerError, Study

EXIT_OK, EXIT_BAD_INPUT = 0, 2


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m explorer", description="Analysis of variance you can edit and defend.")
    sub = parser.add_subparsers(dest="command", required=True)
    check = sub.add_parser("check", help="print the partition and level tables for a data file")
    check.add_argument("data")
    check.add_argument("--response", required=True)
    check.add_argument("--factor", action="append", required=True)
    args = parser.parse_args(argv)
    try:
        study = Study(args.data, response=args.response, factors=args.factor)
    except ExplorerError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    res = study.results
    print(res.partition.to_frame().to_string(index=False))
    for table in res.levels.values():
        print()
        print(table.to_frame().to_string(index=False))
    print()
    print(res.decision())
    return EXIT_OK
