"""Number and text formatting shared by the CLI and every report format, so numbers never disagree.

The number style, one rule for every output (terminal tables, JSON sentences, HTML, Markdown,
DOCX, LaTeX, plot labels), after APA 7 (Publication Manual, 7th ed., 6.36):

- A quantity on the scale of an agreement coefficient (bounded by 1 in absolute value) has no
  leading zero: a coefficient, its interval ends and one-sided bound, its standard error (the
  SE of a coefficient bounded by 1 is at most 1), a change between two coefficients; so do
  probabilities, shares of resamples and thresholds: ``.843``, ``−.120``, ``1.000``, SE ``.034``.
- Three decimals (`DEFAULT_DIGITS`) for all of them, so that coefficients that differ in the
  third decimal never print alike; probabilities below .001 print as ``< .001``.
- Numbers that can exceed 1 keep the leading zero (ratios, test statistics: kind "number").
- Counts get thousands separators; percentages one decimal (`percent_label`).
- Negative numbers use the minus sign (U+2212); missing values an en dash.

Report text is written in a small markup: ``*italic*`` for statistical symbols and
``[[placeholder]]`` for what the author must fill in; `lit` escapes user text (code names,
file names) so it is never read as markup.
"""

from __future__ import annotations

import html
import math
import re
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np

from agree.core.constants import CI_METHODS
from agree.core.registry import ORDERED_LEVELS, coefficient

if TYPE_CHECKING:
    import pandas as pd

    from agree.core.results import AgreementResult

#: Decimals of coefficients, standard errors, interval ends and changes in every output.
DEFAULT_DIGITS = 3
#: Kinds of `format_value` on the scale of a coefficient or a probability: no leading zero.
BOUNDED_KINDS = ("coefficient", "se", "probability", "threshold")


def format_value(x: Any, kind: str = "coefficient", digits: int = DEFAULT_DIGITS) -> str:
    """Format one number for display, the same way everywhere (the rule: see the module).

    kind
        "coefficient" (also for changes between coefficients) and "se": no leading zero,
        ``digits`` decimals (default three): ``.843``, ``−.120``, ``.034``.
        "probability": no leading zero, 3 decimals, ``< .001`` below that.
        "threshold": no leading zero, 3 decimals (``.800``, ``.667``).
        "number": a quantity that can exceed 1 (a ratio, a test statistic): leading zero,
        ``digits`` decimals.
        "count": integer with thousands separators; "amount": the same, one decimal if fractional.
        "percent": a share (0..1) as a percentage with one decimal.
    Missing, None and NaN give an en dash. Negative numbers use the minus sign (U+2212).
    """
    if x is None or isinstance(x, str) and not x:
        return "–"
    if isinstance(x, str):
        return x
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    v = float(x)
    if not math.isfinite(v):
        return "–"
    if kind == "count":
        return f"{int(round(v)):,}"
    if kind == "amount":
        return f"{int(v):,}" if v.is_integer() else f"{v:,.1f}"
    if kind == "percent":
        return percent_label(v, 1)
    if kind == "probability":
        if 0 < v < 0.001:
            return "< .001"
        text = f"{v:.3f}"
    elif kind == "threshold":
        text = f"{v:.3f}"
    elif kind in ("se", "number", "coefficient"):
        text = f"{v:.{digits}f}"
    else:
        raise ValueError(f"unknown kind {kind!r}")
    if text.startswith("-") and float(text) == 0:
        text = text[1:]
    if kind in BOUNDED_KINDS:
        text = re.sub(r"^(-?)0\.", r"\1.", text)
    return text.replace("-", "\u2212")


def format_bound(x: Any, minimum: float | None = None) -> str:
    """A one-sided lower bound for display: three decimals, rounded down where rounding to the
    nearest would reach `minimum`, so a bound below the minimum is never shown as reaching it
    (.7996 -> ``.799`` with minimum .8; without a minimum always rounded down)."""
    if x is None or isinstance(x, str):
        return format_value(x, "threshold")
    v = float(x)
    if not math.isfinite(v):
        return "–"
    nearest = round(v, 3)
    if minimum is None or (v < minimum <= nearest):
        return format_value(math.floor(v * 1000 + 1e-9) / 1000, "threshold")
    return format_value(nearest, "threshold")


def format_interval(low: Any, high: Any, digits: int = DEFAULT_DIGITS) -> str:
    """``[.791, .884]``; an en dash when there is no interval."""
    if low is None or high is None or not (math.isfinite(float(low)) and math.isfinite(float(high))):
        return "–"
    return f"[{format_value(low, 'coefficient', digits)}, {format_value(high, 'coefficient', digits)}]"


def signed(x: Any, digits: int = DEFAULT_DIGITS) -> str:
    """A change of a coefficient with its sign: ``+.012``, ``−.034``, ``.000``; an en dash if none."""
    text = format_value(x, "coefficient", digits)
    return text if text.startswith(("−", "–")) or text.strip(".0") == "" else "+" + text


def signed_interval(low: Any, high: Any, digits: int = DEFAULT_DIGITS) -> str:
    """The interval of a change, each end with its sign: ``[−.012, +.034]``; an en dash if none."""
    if low is None or high is None or not (math.isfinite(float(low)) and math.isfinite(float(high))):
        return "–"
    return f"[{signed(low, digits)}, {signed(high, digits)}]"


def lit(text: Any) -> str:
    """Escape user text (code names, file names) so it is never read as markup."""
    return str(text).replace("\\", "\\\\").replace("*", "\\*").replace("[", "\\[")


def spans(markup: str) -> list[tuple[str, str]]:
    """Split markup into (kind, text) pieces: kind is "text", "italic" or "placeholder"."""
    out: list[tuple[str, str]] = []
    buf: list[str] = []
    kind = "text"
    i = 0

    def flush(new_kind: str) -> None:
        nonlocal kind
        if buf:
            out.append((kind, "".join(buf)))
            buf.clear()
        kind = new_kind

    while i < len(markup):
        ch = markup[i]
        if ch == "\\" and i + 1 < len(markup):
            buf.append(markup[i + 1])
            i += 2
            continue
        if ch == "*" and kind in ("text", "italic"):
            flush("italic" if kind == "text" else "text")
        elif markup.startswith("[[", i) and kind == "text":
            flush("placeholder")
            i += 1
        elif markup.startswith("]]", i) and kind == "placeholder":
            buf[:0] = ["["]
            buf.append("]")
            flush("text")
            i += 1
        else:
            buf.append(ch)
        i += 1
    flush("text")
    return out


def plain(markup: str) -> str:
    """Markup as plain text (placeholders keep their brackets)."""
    return "".join(text for _, text in spans(markup))


def result_label(result: "AgreementResult", level: str | None = None, *, markup: bool = False,
                 in_sentence: bool = False) -> str:
    """A result's name with the choice behind it, in the same words in the CLI and every report.

    The registry's display name (`markup=True`: its report label, with Greek symbols), then
    alpha's metric ("(ordinal metric)", "(MASI distance)"), the weights ("(linear weights)")
    or, for a coefficient computed without weights on ordered data (`level` ordinal, interval
    or ratio), "(unweighted)". Capitalised unless `in_sentence`.
    """
    row = coefficient(result.name)
    escape = lit if markup else str
    if row is None:
        name = escape(result.name.replace("_", " "))
    else:
        name = row.label if markup else row.display
    qualifier = ""
    if row is not None and row.family == "alpha":
        if result.level in ("masi", "jaccard"):
            qualifier = f"{'MASI' if result.level == 'masi' else 'Jaccard'} distance"
        elif result.level:
            qualifier = f"{result.level} metric"
    elif result.weights and "weights" not in name:
        qualifier = f"{result.weights} weights"
    elif not result.weights and level in ORDERED_LEVELS:
        qualifier = "unweighted"
    text = name + (f" ({escape(qualifier)})" if qualifier else "")
    return text if in_sentence else text[:1].upper() + text[1:]


def _notebook_cell(v: Any, counts: bool = False, bounded: bool = False) -> str:
    if isinstance(v, (frozenset, set)):
        return "; ".join(sorted(str(x) for x in v)) or "–"
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, (int, np.integer)):
        return f"{int(v):,}"
    if isinstance(v, (float, np.floating)):
        if not math.isfinite(float(v)):
            return "–"
        if counts:
            return f"{int(v):,}"
        return format_value(v, "coefficient" if bounded else "number")
    if v is None or (isinstance(v, str) and not v):
        return "–"
    return str(v)


#: Result-table columns of quantities that can exceed 1 (test statistics, degrees of freedom,
#: ratios, counts): they keep the leading zero even when every value shown is below 1.
UNBOUNDED_COLUMNS = re.compile(r"statistic|(^|_)(df|ratio|over|n|uses|count|units|values|pairable)(_|$)")


def _notebook_frame(frame: "pd.DataFrame") -> "pd.DataFrame":
    """The cells of a result table as text in the module's number style: three decimals, no
    leading zero in a column of quantities bounded by 1 (coefficients, their intervals and
    changes, SEs, probabilities, shares), whole counts, '–' where missing."""
    shown = frame.astype(object).copy()
    for j in range(frame.shape[1]):
        column = frame.iloc[:, j]
        finite = column[np.isfinite(column)] if column.dtype.kind in "fiu" else column.iloc[:0]
        counts = bool(len(finite) and (finite == np.round(finite)).all() and (finite.abs() > 1).any())
        bounded = (column.dtype.kind == "f" and bool((finite.abs() <= 1).all())
                   and not UNBOUNDED_COLUMNS.search(str(frame.columns[j])))
        shown.iloc[:, j] = [_notebook_cell(v, counts, bounded) for v in column]
    return shown


def notebook_text(name: str, summary: str, frame: "pd.DataFrame | None" = None, *,
                  notes: Sequence[str] = (), columns: Sequence[str] | None = None,
                  max_rows: int = 10, max_cell: int = 28) -> str:
    """A result's ``repr``: its name and summary line, its main table as `notebook_html` shows it
    (the `columns` given, first and last rows when long, long cells shortened) and its first
    notes. A screenful that says what the result says, as pandas and scipy objects do, never
    every array it holds."""
    said, _, rest = summary.partition(": ")
    if rest and said.replace(" ", "").lower() == name.lower():     # "Plan: ..." under the name Plan
        summary = rest
    lines = [f"{name}: {summary}"]
    if frame is not None and columns is not None:
        frame = frame[[c for c in columns if c in frame.columns]]
    if frame is not None and frame.shape[1]:
        lines.append(_notebook_frame(frame).to_string(index=False, max_rows=max_rows, max_colwidth=max_cell))
    shown = list(notes)[:3]
    lines += [f"note: {n}" for n in shown]
    if len(notes) > len(shown):
        lines.append(f"({len(notes) - len(shown)} more notes)")
    return "\n".join(lines)


def notebook_html(summary: str, frame: "pd.DataFrame", *, notes: Sequence[str] = (),
                  max_rows: int = 60) -> str:
    """A result for a notebook: one summary line and its main table (an HTML fragment).

    All text is HTML-escaped; missing values and NaN show as an en dash; numbers get three
    decimals (whole counts none). Long tables show their first and last rows."""
    shown = _notebook_frame(frame)
    table = shown.to_html(index=False, escape=True, na_rep="–", max_rows=max_rows,
                          border=0, classes="agree-table")
    notes_html = "".join(f"<p><small>{html.escape(str(n))}</small></p>" for n in notes)
    return f'<div class="agree-result"><p>{html.escape(summary)}</p>\n{table}\n{notes_html}</div>'


# -- the decision against a minimum ------------------------------------------------------


def percent_label(share: Any, digits: int | None = None) -> str:
    """A share (0..1) as a percentage, the one percent format of every output.

    With ``digits=None`` as many decimals as the number needs (confidence levels: 0.95 ->
    ``95%``, 0.975 -> ``97.5%``); otherwise that many (``percent_label(0.8426, 0)`` ->
    ``84%``). None and NaN give an en dash."""
    if share is None or isinstance(share, str):
        return format_value(share)
    v = float(share)
    if not math.isfinite(v):
        return "–"
    if digits is None:
        return f"{round(v * 100, 4):g}%"
    return f"{100 * v:.{digits}f}%"


def _coef(x: float, digits: int) -> str:
    return format_value(x, "coefficient", digits)


_APPROXIMATIONS = {"wilson": "Wilson score bound, no resampling",
                   "wald": "normal approximation from the analytic SE, no resampling",
                   "t": "t approximation from the analytic SE, no resampling"}


def bound_method(result: "AgreementResult") -> str:
    """How a result's interval and bound were made, in words: "Bayesian bootstrap with a
    least-favourable pseudo-unit, 2,000 draws", "BCa bootstrap, 2,000 resamples of whole
    interview groups", "t approximation from the analytic SE, no resampling"."""
    method = result.ci_method or ""
    if method in _APPROXIMATIONS:
        return _APPROXIMATIONS[method]
    words = CI_METHODS.get(method, method.replace("_", " "))
    b = result.bootstrap
    if b is None:
        return words
    what = "draws" if b.method == "pseudo-unit" else "resamples"
    if b.unit != "unit":
        group = b.unit.partition(":")[2]
        what += f" of whole {group} groups" if group else " of whole groups"
    return f"{words}, {b.replicates:,} {what}"


def decision_sentence(result: "AgreementResult", minimum: float, confidence_level: float | None = None,
                      *, digits: int = DEFAULT_DIGITS) -> str:
    """Whether a coefficient's lower confidence bound clears a minimum, as one sentence that
    says what the bound rests on.

    Uses the one-sided lower bound (`result.lower_bound`) when there is one, else the lower end
    of the two-sided interval, and says which and how it was made (`bound_method`). "Clears"
    means strictly above the minimum (`agree.core.results.reaches_minimum`, the rule of every
    output): a bound equal to the minimum does not clear it. When rounding would show the
    bound and the minimum as equal, more digits are shown. With no disagreement among the
    units (``details["disagreeing_units"] == 0``) the sentence says so first, and with fewer
    than five disagreeing units that the bound rests mainly on their number.

    Examples: "alpha = .913; the one-sided 95% lower bound .831 (Bayesian bootstrap with a
    least-favourable pseudo-unit, 2,000 draws) clears the minimum .800"; "alpha = 1.000: no
    disagreement among the 20 units; with so few units the one-sided 95% lower bound .717
    (...) does not clear the minimum .800"; a bound of .8003 is shown as ".8003 clears the
    minimum .8000" rather than as equal to it.
    """
    from agree.core.results import reaches_minimum

    row = coefficient(result.name)
    name = row.sentence_name if row is not None else result.name.replace("_", " ")
    level = result.confidence_level if confidence_level is None else confidence_level
    estimate = result.estimate
    if estimate is None or not math.isfinite(estimate):
        return f"{name} is undefined, so it cannot be compared with the minimum {_coef(minimum, digits)}"
    if result.lower_bound is not None and math.isfinite(result.lower_bound):
        bound, kind = result.lower_bound, f"the one-sided {percent_label(level)} lower bound"
    elif result.ci_low is not None and math.isfinite(result.ci_low):
        bound, kind = result.ci_low, f"the lower end of the two-sided {percent_label(level)} interval"
    else:
        return (f"{name} = {_coef(estimate, digits)}; no confidence bound is available, so the minimum "
                f"{_coef(minimum, digits)} cannot be tested")
    clears = reaches_minimum(bound, minimum)
    shown = digits
    while shown < 4 and bound != minimum and _coef(bound, shown) == _coef(minimum, shown):
        shown += 1
    verb = "clears" if clears else "does not clear"
    how = bound_method(result)
    how = f" ({how})" if how else ""
    rest = f"{kind} {_coef(bound, shown)}{how} {verb} the minimum {_coef(minimum, shown)}"
    if bound == minimum:
        rest = (f"{kind} {_coef(bound, shown)}{how} equals the minimum {_coef(minimum, shown)}, "
                "so it does not clear it")
    d = result.details.get("disagreeing_units") if result.details else None
    n = result.n_units
    if d == 0 and n:
        few = "with so few units " if not clears else ""
        return f"{name} = {_coef(estimate, shown)}: no disagreement among the {n:,} units; {few}{rest}"
    text = f"{name} = {_coef(estimate, shown)}; {rest}"
    if d is not None and 0 < d < 5 and n:
        text += (f"; with only {d} of {n:,} units disagreeing, the bound rests mainly on how many "
                 "units disagree")
    return text


def p_min_label(minimum: float, *, markup: bool = False) -> str:
    """The column heading of the p-value against the minimum: ``p(≤ .800)`` (markup: *p*)."""
    return f"{'*p*' if markup else 'p'}(≤ {format_value(minimum, 'threshold')})"


def p_min_note(minimum: float, confidence_level: float, *, resampled: bool = True, markup: bool = False) -> str:
    """What the p-value column against the minimum is, in one sentence for a table's note: the
    one-sided p-value of the coefficient at or below the minimum, from the same draws as the
    bound (or, without resampling, from the analytic approximation), never a substitute for it."""
    label = p_min_label(minimum, markup=markup)
    eps = format_value(1 - confidence_level, "probability")
    source = ("read off the same draws as the one-sided lower bound (with the pseudo-unit method the "
              f"posterior probability that the coefficient is at or below {format_value(minimum, 'threshold')})"
              if resampled else
              "from the normal or t approximation with the analytic SE (the score test for the Wilson bound); "
              "none where no analytic SE is published")
    return (f"{label}: one-sided p-value of the coefficient being at or below the minimum, {source}; "
            f"the bound clears the minimum exactly when {'*p*' if markup else 'p'} < {eps}. "
            "The decision rests on the bound.")
