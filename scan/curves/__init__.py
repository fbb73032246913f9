"""Bound curves as self-describing CSV files: parse, validate, convert to canonical units.

The format ("zetascan curve format", BCF v1) is documented in ``constraints/README.md``;
``schema`` holds its keys and units.  ``load_curve(path) -> Curve`` is the entry point;
every malformed file raises :class:`scan.errors.InputFileError` naming line, column and
fix, and suspicious but legal content warns with :class:`CurveWarning`.
"""
from scan.curves.load import load_curve, parse_bytes, parse_text
from scan.curves.meta import CurveWarning
from scan.curves.model import Curve
from scan.curves.write import format_curve, write_curve

__all__ = ["Curve", "CurveWarning", "format_curve", "load_curve", "parse_bytes",
           "parse_text", "write_curve"]
