"""Cross-check of Flipwright's IEC 60063 E-series tables against the PyPI package `eseries`.

Reads the table text that `flipwright::units::series_table_text()` produces (one line per
series: "E24 1.0 1.1 ...") on standard input and compares every value with `eseries.series()`.

Setup and use (Python 3.11):
    python3 -m venv /tmp/esv && /tmp/esv/bin/pip install eseries
    flipwright series-tables | /tmp/esv/bin/python tests/python/eseries_check.py

Exit status: 0 when every value agrees (prints "N passed, 0 failed"), 1 on any difference
(each one described on standard error), 2 when the input or the `eseries` package is missing.
"""

from __future__ import annotations

import sys
from decimal import Decimal, InvalidOperation

USAGE_ERROR = 2
MISMATCH = 1


def reference_tables() -> dict[str, list[Decimal]]:
    """The series from `eseries`, as decimal mantissas 1 <= m < 10 keyed by name ("E24")."""
    try:
        import eseries
    except ImportError:
        print(
            "eseries_check: the package `eseries` is not installed; expected it in this "
            "Python, e.g. python3 -m venv /tmp/esv && /tmp/esv/bin/pip install eseries",
            file=sys.stderr,
        )
        sys.exit(USAGE_ERROR)
    tables = {}
    for key in eseries.series_keys():
        # eseries gives integers of the series' significant figures: E24 has 10, 11, ...;
        # E96 has 100, 102, ...; scale each down to a mantissa below ten.
        tables[key.name] = [
            Decimal(value).scaleb(-(len(str(value)) - 1)) for value in eseries.series(key)
        ]
    return tables


def read_our_tables(text: str) -> dict[str, list[str]]:
    """Parses "NAME v1 v2 ..." lines; values are kept as text so typos show as typed."""
    tables: dict[str, list[str]] = {}
    for line_number, line in enumerate(text.splitlines(), start=1):
        fields = line.split()
        if not fields:
            continue
        name, values = fields[0], fields[1:]
        if name in tables:
            print(f"eseries_check: line {line_number}: {name} appears twice", file=sys.stderr)
            sys.exit(USAGE_ERROR)
        tables[name] = values
    return tables


def main() -> int:
    if sys.stdin.isatty():
        print(
            "eseries_check: expected the table text on standard input, e.g. "
            "`flipwright series-tables | python eseries_check.py`",
            file=sys.stderr,
        )
        return USAGE_ERROR
    ours = read_our_tables(sys.stdin.read())
    if not ours:
        print(
            "eseries_check: standard input held no tables; expected lines such as "
            "'E3 1.0 2.2 4.7'",
            file=sys.stderr,
        )
        return USAGE_ERROR
    reference = reference_tables()

    passed = 0
    failures: list[str] = []

    def record(ok: bool, description: str) -> None:
        nonlocal passed
        if ok:
            passed += 1
        else:
            failures.append(description)

    for name in sorted(set(ours) - set(reference)):
        record(False, f"{name}: not a series that eseries knows")
    for name, expected in reference.items():
        if name not in ours:
            record(False, f"{name}: missing from our tables")
            continue
        actual_text = ours[name]
        record(
            len(actual_text) == len(expected),
            f"{name}: {len(actual_text)} values, eseries has {len(expected)}",
        )
        for index, expected_value in enumerate(expected):
            if index >= len(actual_text):
                record(False, f"{name}[{index}]: missing, eseries has {expected_value}")
                continue
            text = actual_text[index]
            try:
                actual_value = Decimal(text)
            except InvalidOperation:
                record(False, f"{name}[{index}]: {text!r} is not a number")
                continue
            record(
                actual_value == expected_value,
                f"{name}[{index}]: ours {text}, eseries {expected_value}",
            )

    for description in failures:
        print(f"MISMATCH {description}", file=sys.stderr)
    print(f"{passed} passed, {len(failures)} failed")
    return MISMATCH if failures else 0


if __name__ == "__main__":
    sys.exit(main())
