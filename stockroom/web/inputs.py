"""The request-value parser, for the web views: it lives in stockroom.parsing (pure, below the web
layer) so the run input module and the views read values by the same rules."""

from stockroom.parsing import MISSING, Parser, field_path, number_problem, range_rule

__all__ = ["MISSING", "Parser", "field_path", "number_problem", "range_rule"]
