"""labbench.search.ranking and labbench.search.states: one "best trial" and one state table, the
same answer from the runner, the winner check, ``labbench show``, the report and the window."""

from __future__ import annotations

import math
from types import SimpleNamespace

import optuna
import pytest
from optuna.trial import TrialState

from labbench.search import ranking, states

optuna.logging.set_verbosity(optuna.logging.ERROR)

SETTINGS = {"A": {"learning_rate": 0.01, "units": 8}, "B": {"learning_rate": 0.02, "units": 8},
            "C": {"learning_rate": 0.02, "units": 16}}


def _tell(study, value, state=None, settings="A", reason="", steps=()):
    t = study.ask()
    t.set_user_attr("settings", SETTINGS[settings])
    t.set_user_attr("fold_scores", [value, value] if value is not None and math.isfinite(value) else [])
    t.set_user_attr("cv_std", 0.0)
    if reason:
        t.set_user_attr("end_reason", reason)
    for step, v in steps:
        t.report(v, step)
    study.tell(t, value if state is None else None, state=state)


@pytest.fixture
def tricky_study(tmp_path):
    """Minimize; ties, a pruned trial whose last step looks best, failed, cancelled, -inf, running."""
    study = optuna.create_study(storage=f"sqlite:///{tmp_path / 'r.db'}", study_name="tricky",
                                direction="minimize")
    study.set_user_attr("metric", "rmse")
    study.set_user_attr("direction", "minimize")
    study.set_user_attr("spec_path", str(tmp_path / "tricky.toml"))   # no winner.json there
    _tell(study, 0.50, settings="A")                                   # 0
    _tell(study, None, TrialState.PRUNED, "B", steps=[(1, 0.9), (2, 0.05)])  # 1: value 0.05 kept
    _tell(study, None, TrialState.FAIL, "C", reason="training diverged at epoch 3")  # 2
    _tell(study, 0.30, settings="B")                                   # 3: the best (earliest tie)
    _tell(study, 0.30, settings="C")                                   # 4: tie, other settings
    _tell(study, 0.30, settings="B")                                   # 5: tie, same as 3
    _tell(study, None, TrialState.FAIL, "A", reason=states.CANCELLED)  # 6: cancelled
    _tell(study, -math.inf, settings="C")                              # 7: not finite
    study.ask()                                                        # 8: running
    return study


def test_the_study_is_as_intended(tricky_study):
    trials = tricky_study.get_trials(deepcopy=False)
    # Optuna keeps the pruned trial's last step as its value, and -inf as a complete value
    assert trials[1].state == TrialState.PRUNED and trials[1].value == pytest.approx(0.05)
    assert trials[7].state == TrialState.COMPLETE and trials[7].value == -math.inf


def test_the_rule(tricky_study):
    trials = tricky_study.get_trials(deepcopy=False)
    assert [t.number for t in ranking.ranked(trials, "minimize")] == [3, 4, 5, 0]
    best, runner_up = ranking.best_and_runner_up(trials, "minimize")
    assert (best.number, runner_up.number) == (3, 4)
    assert [t.number for t in ranking.distinct(trials, "minimize")] == [3, 4, 0]
    assert [t.number for t in ranking.ranked(trials, "maximize")] == [0, 3, 4, 5]
    assert ranking.best_trial([], "minimize") is None
    assert ranking.best_and_runner_up(trials[:3], "minimize")[1] is None


def test_is_better_keeps_the_earlier_on_a_tie():
    assert ranking.is_better(0.3, None, "minimize")
    assert not ranking.is_better(0.3, 0.3, "minimize") and not ranking.is_better(0.3, 0.3, "maximize")
    assert ranking.is_better(0.2, 0.3, "minimize") and ranking.is_better(0.4, 0.3, "maximize")
    assert not ranking.is_better(float("nan"), None, "minimize")


def test_every_part_of_labbench_names_the_same_best(tricky_study):
    from labbench.export.report_data import collect
    from labbench.export.report_plots import best_number
    from labbench.gui.core import snapshot
    from labbench.search.bookkeeping import best_of
    from labbench.search.commands import trials_table
    from labbench.search.winner import pick_winner

    trials = tricky_study.get_trials(deepcopy=False)
    answers = {
        "runner": best_of(trials, "minimize")[0],
        "winner check": pick_winner(trials, "minimize")[0].number,
        "report": best_number(collect(tricky_study)),
        # the window's records (what it draws from), ranked by the same function
        "window": ranking.best_trial([snapshot(t) for t in trials], "minimize").number,
    }
    show = trials_table(tricky_study)
    answers["show"] = int(show.split("best: trial ", 1)[1].split(",", 1)[0])
    assert set(answers.values()) == {3}, answers
    assert pick_winner(trials, "minimize")[1].number == 4


def test_every_part_of_labbench_reads_the_same_states(tricky_study):
    from labbench.export.report_data import collect
    from labbench.gui.core import snapshot

    trials = tricky_study.get_trials(deepcopy=False)
    keys = [states.trial_key(t) for t in trials]
    assert keys == ["complete", "pruned", "failed", "complete", "complete", "complete",
                    "cancelled", "complete", "running"]
    assert [snapshot(t).state for t in trials] == keys                 # the window's records
    assert [r.state for r in collect(tricky_study).trials] == keys     # the report's rows
    assert states.count(trials) == {"complete": 5, "pruned": 1, "failed": 1, "cancelled": 1,
                                    "running": 1, "waiting": 0}


def test_show_and_report_use_the_words(tricky_study):
    from labbench.export.report import render_html
    from labbench.export.report_data import collect
    from labbench.search.commands import trials_table

    show = trials_table(tricky_study).splitlines()
    row = {line.split()[0]: line for line in show[2:11]}
    expected = {"0": "complete", "1": "pruned", "2": "failed", "3": "complete", "4": "complete",
                "5": "complete", "6": "cancelled", "7": "complete", "8": "running"}
    for number, key in expected.items():       # the one table of words (states.WORDS)
        assert row[number].split(None, 1)[1].startswith(states.WORDS[key]), (number, row[number])
    assert "trial 2 failed: training diverged at epoch 3" in show
    page = render_html(collect(tricky_study))
    assert '<td class="num">3</td><td>finished (winner)</td>' in page   # the best is marked
    for key in ("complete", "cancelled", "running"):
        assert f"<td>{states.WORDS[key]}</td>" in page


def test_records_with_keys_and_odd_values():
    rows = [SimpleNamespace(number=0, state="complete", value=float("nan"), settings={}),
            SimpleNamespace(number=1, state="pruned", value=0.1, settings={}),
            SimpleNamespace(number=2, state="complete", value="0.7", settings={}),
            SimpleNamespace(number=3, state="complete", value=None, settings={}),
            SimpleNamespace(number=4, state="complete", value=True, settings={}),
            SimpleNamespace(number=5, state="complete", value=0.9, settings={"a": 1})]
    assert ranking.best_trial(rows, "maximize").number == 5
    assert ranking.best_trial(rows, "minimize").number == 2
    assert ranking.best_and_runner_up(rows, "maximize")[1].number == 2


def test_state_words_and_keys():
    assert set(states.WORDS) == set(states.MEANINGS) == set(states.KEYS)
    assert len(set(states.WORDS.values())) == len(states.WORDS)         # no two keys share a word
    assert states.key_of(TrialState.COMPLETE) == "complete" and states.key_of("PRUNED") == "pruned"
    assert states.key_of(TrialState.FAIL, states.CANCELLED) == "cancelled"
    assert states.key_of("cancelled") == "cancelled" and states.word("waiting") == "queued"
    assert states.counts_text({"complete": 2, "pruned": 0, "failed": 1}) == "2 finished, 1 failed"
