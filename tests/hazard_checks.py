"""Checks of a hazard.json shared by the fast run and the demo's files (slow test).

The rule checked is the package's own (workflow/hazard_format.py): an estimate given
to the first significant digit of its uncertainty, common practice, no source.
"""
from ventsource.workflow.hazard_format import decimals_for_error

PROBABILITIES = ("p_magmatic", "p_scrubbed", "p_released", "p_scrubbed_below_epsilon_if_scrubbed")


def assert_rounding_rule(doc):
    """Every probability: strictly between 0 and 1, to the decimals its error supports, its
    error to the same place; its text form never reads as 0 or 1; Bayes factors 1 decimal."""
    seen = 0
    for row in doc["rows"]:
        for name in PROBABILITIES:
            if row.get(name) is None:
                continue
            p, err = row[name], row.get(f"{name}_error")
            d = decimals_for_error(err)
            assert 0.0 < p < 1.0, (row["id"], name, p)
            assert p == round(p, d), (row["id"], name, p, err)
            if err is not None:
                assert err == round(err, d) and err >= 10.0 ** -d, (row["id"], name, err)
            text = row.get(f"{name}_text")
            if text is not None:
                assert text not in ("0", "1", "0.0", "1.0") and not text.startswith(("0.0 ", "1.0"))
                if text.startswith("<"):
                    assert p == 10.0 ** -d
                elif text.startswith(">"):
                    assert p == round(1.0 - 10.0 ** -d, d)
                else:
                    assert float(text.split(" ")[0]) == p
            seen += 1
    for w in doc.get("windows", []):
        for k in ("log10_bf_one_source", "log10_bf_one_vs_split"):
            if w[k] is not None:
                assert w[k] == round(w[k], 1)
    assert seen > 0
