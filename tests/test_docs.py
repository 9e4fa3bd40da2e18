"""Every public function and class has a docstring; coefficients document their parameters,
return value and sources (numpydoc sections)."""

import pytest

import agree
from agree.core.registry import COEFFICIENTS as REGISTRY

# every public function of the coefficients module that computes a registry row (rows computed
# from coded spans are checked in their own tests, e.g. tests/stats/test_unitizing.py)
COEFFICIENTS = sorted({row.function for row in REGISTRY if row.module == "agree.stats.coefficients"})


@pytest.mark.parametrize("name", sorted(agree.__all__))
def test_every_export_has_a_docstring(name):
    assert (getattr(agree, name).__doc__ or "").strip(), name


@pytest.mark.parametrize("name", COEFFICIENTS)
def test_coefficients_document_parameters_returns_notes_and_references(name):
    doc = getattr(agree, name).__doc__
    for section in ("Parameters\n", "Returns\n", "Notes\n", "References\n"):
        assert section in doc, (name, section)
    assert doc.index("Parameters") < doc.index("Returns") < doc.index("Notes") < doc.index("References")
    for parameter in ("data :", "categories :", "n_resamples :", "seed :", "minimum :", "cluster :"):
        assert parameter in doc, (name, parameter)
    references = doc[doc.index("References\n"):]
    for row in REGISTRY:                        # the sources of every result it computes
        if row.function == name:
            assert row.references and all(source in references for source in row.references), (name, row.name)
