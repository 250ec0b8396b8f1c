"""Tests for gwpred._utils (layer 0): parameter rules, extras, atomic writes, input checks.

Outside references: scikit-learn's parameter-validation messages are the
pattern (name, allowed values, value received); Python's importlib decides
what is importable; the filesystem (os.replace) makes writes atomic.
"""

from __future__ import annotations

import numpy as np
import pytest

from gwpred._utils import (
    CAUTION,
    Interval,
    Options,
    Rule,
    Types,
    atomic_open,
    atomic_write_text,
    check_inputs,
    has_extra,
    install_hint,
    require_extra,
    validate_params,
)


@pytest.mark.parametrize(
    "rule, good, bad, match",
    [
        (Rule(Options(("auto", True, False))), ["auto", True, False], [1, 0, "x"], r"one of \['auto', True, False\]"),
        (Rule(Interval(1, np.inf, integer=True)), [1, 7, np.int64(3)], [0, 2.5, True, np.nan], "a positive integer"),
        (Rule(Interval(0.0, 1.0)), [0, 0.5, 1], [-0.1, 1.1, "0.5", np.inf, False], r"a number in \[0, 1\]"),
        (Rule(Interval(0.0)), [0, 3.5], [-1], "a non-negative number"),
        (Rule(Options(("vote",)), Interval(1, np.inf, integer=True)), ["vote", 3], ["many", 0], "'vote' or a positive integer"),
        (Rule(None, Types((str,))), [None, "label"], [3], "None or str"),
    ],
)
def test_rules_accept_and_refuse(rule, good, bad, match):
    for value in good:
        validate_params({"p": value}, {"p": rule})
    for value in bad:
        with pytest.raises(ValueError, match=rf"p must be {match}; got "):
            validate_params({"p": value}, {"p": rule})


def test_rule_with_its_own_words_and_error_type():
    rule = Rule(Types((bool, dict)), what="True, False or a dict", error=TypeError)
    with pytest.raises(TypeError, match=r"valence must be True, False or a dict; got 'yes'\."):
        validate_params({"valence": "yes"}, {"valence": rule})


def test_require_extra_names_the_extra():
    # qm9pack is a real extra; a module that cannot exist stands in for a missing one
    from gwpred import _utils

    _utils.EXTRAS["gwpred_no_such_module"] = ("chem", "RDKit")
    try:
        with pytest.raises(ImportError, match=r"drawing needs RDKit \(the optional extra 'chem' of gwpred\); "
                           r"install it with: pip install 'gwpred\[chem\]' \(or 'gwpred\[all\]'\)"):
            require_extra("gwpred_no_such_module", "drawing")
    finally:
        del _utils.EXTRAS["gwpred_no_such_module"]
    assert not has_extra("gwpred_no_such_module")
    # neural is not in [all], and plain `pip install torch` may fetch a CUDA build: a CPU build first
    assert install_hint("neural") == (
        "a CPU build of PyTorch first (pip install torch --index-url https://download.pytorch.org/whl/cpu), "
        "then pip install 'gwpred[neural]'")


def test_atomic_write_keeps_the_old_file_on_failure(tmp_path):
    target = tmp_path / "user.txt"
    target.write_text("precious")
    with pytest.raises(RuntimeError):
        with atomic_open(target, binary=False) as fh:
            fh.write("half")
            raise RuntimeError("killed")
    assert target.read_text() == "precious"
    assert [p.name for p in tmp_path.iterdir()] == ["user.txt"]  # no temporary file left
    atomic_write_text(target, "new")
    assert target.read_text() == "new"
    with pytest.raises(FileNotFoundError, match="does not exist; create it first"):
        atomic_write_text(tmp_path / "no" / "dir.txt", "x")


def test_check_inputs_messages():
    with pytest.raises(ValueError, match=r"X has 1 NaN or infinite value\(s\), the first at row 1, column 0"):
        check_inputs([[0.0], [np.nan]])
    with pytest.raises(ValueError, match=r"F must be 2-D"):
        check_inputs([1.0, 2.0], "F")


def test_caution_is_the_usual_one():
    # the usual caution for predicted structures (common practice)
    assert "analytical methods" in CAUTION and "safety data sheets" in CAUTION
