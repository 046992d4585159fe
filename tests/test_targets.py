"""The target registry: a toy target is one object and one template, and every layer works with it.

The toy target writes each card on one line (a syntax of its own, read by any SPICE-family
simulator) and carries a reduced parameter set with ngspice's equations. Registered here, it must
work in the renderer, the evaluator, the temperature fit, `check` and the command line without
any change elsewhere.
"""


import numpy as np
import pytest
from click.testing import CliRunner

from modelgen import cards, corners, description, extraction, targets
from modelgen.cards import reader
from modelgen.cli import main
from modelgen.spice import check, evaluator

from support import ROOT, need

EXAMPLE = ROOT / "examples" / "switching_diode.toml"

ONE_LINE = """{% for line in card.header %}
{{ line }}
{% endfor %}
.model {{ card.name }} D ({% for key, value in card.params %}{{ key }}={{ value }}{% if not loop.last %} {% endif %}{% endfor %})
"""


@pytest.fixture
def toy(tmp_path):
    template = tmp_path / "one_line.j2"
    template.write_text(ONE_LINE)
    target = targets.register(targets.Target(
        "toyline", "one-line test cards", carries=("IS", "N", "RS", "CJO", "VJ", "M", "TT", "EG", "XTI", "TNOM"),
        sidewall="fold", sections=False, equations="ngspice", simulators=("ngspice",),
        cost={"BV": "no breakdown in the toy set"}, template=str(template)))
    yield target
    targets.unregister("toyline")


def test_builtin_targets_name_known_simulators():
    for t in targets.TARGETS.values():
        assert t.simulator is targets.SIMULATORS[t.equations]
        assert set(t.simulators) <= set(targets.SIMULATORS)


def test_registering_a_bad_target_is_refused():
    with pytest.raises(ValueError, match="unknown simulator"):
        targets.register(targets.Target("bad", "bad", carries=("IS",), sidewall="fold", sections=False,
                                        equations="nosuchsim", simulators=()))
    assert "bad" not in targets.TARGETS


def test_toy_target_renders_with_its_own_template(toy):
    r = extraction.derive(description.load(EXAMPLE))
    text = cards.card(r, 0, dialect="toyline")
    model_lines = [ln for ln in text.splitlines() if ln.startswith(".model")]
    assert len(model_lines) == 1 and model_lines[0].endswith(")")  # the template decides the syntax
    read = reader.read_cards(text)[0]
    values, left = cards.card_values(r, 0, "toyline")
    assert read.params == {k: v for k, v in values}
    assert list(read.params) == [k for k in toy.carries if k in read.params]
    # what it cannot carry is said, with its cost
    assert "no breakdown in the toy set" in text and "BV=" in text.split(".model")[0]
    assert {k for k, _ in left} >= {"BV", "ISR", "IKF"}


def test_toy_target_in_the_evaluator_and_the_temperature_fit(toy):
    device = description.load(EXAMPLE)
    run = corners.run(device, [-40.0, 27.0, 125.0], "toyline")
    assert set(run.fit.values) == {"EG", "XTI"}  # it carries no TCV or TRS
    assert run.fit.worst_error["IS"] < 0.05
    card = dict(cards.card_values(run.result, run.nominal, "toyline", overrides=run.fit.values)[0])
    i, _ = evaluator.dc_current(card, np.array([0.5, 0.6]), toy.simulator)
    i_ng, _ = evaluator.dc_current(card, np.array([0.5, 0.6]), "ngspice")
    np.testing.assert_array_equal(i, i_ng)  # its equations are the ones it names
    text = corners.card_text(run)
    assert "EG=" in text and "temperature fit over -40 to 125 degC" in text


def test_toy_target_proven_in_its_simulator(toy, tmp_path):
    need("ngspice")
    r = extraction.derive(description.load(EXAMPLE))
    text = cards.card(r, 0, dialect="toyline")
    outcomes = check.check_text(text, list(toy.simulators))
    assert outcomes and all(o.ok for o in outcomes), outcomes
    # `modelgen check` with no options reads the dialect from the header and runs the toy's simulators only
    path = tmp_path / "toy.lib"
    path.write_text(text)
    res = CliRunner().invoke(main, ["check", str(path)])
    assert res.exit_code == 0, res.output
    assert "ngspice" in res.stdout and "gnucap" not in res.stdout


def test_toy_target_on_the_command_line(toy, tmp_path):
    res = CliRunner().invoke(main, ["card", str(EXAMPLE), "--dialect", "toyline", "-q"])
    assert res.exit_code == 0, res.output
    assert "dialect toyline (one-line test cards)" in res.stdout
    res = CliRunner().invoke(main, ["card", str(EXAMPLE), "--dialect", "nosuch", "-q"])
    assert res.exit_code == 2 and "toyline" in res.stderr  # the registry is what the option offers


def test_toy_target_writes_a_lot_library(toy, tmp_path):
    out = tmp_path / "lot.lib"
    res = CliRunner().invoke(main, ["lots", str(ROOT / "examples" / "lot_table.csv"), "-o", str(out),
                                    "--dialect", "toyline", "-q"])
    assert res.exit_code == 0, res.output
    read = reader.read_file(out)
    assert len(read) == 6 and all(set(c.params) <= set(toy.carries) for c in read)
    assert sum(ln.startswith(".model") for ln in out.read_text().splitlines()) == 6  # one line per card
