"""Cards proven in real simulators (ngspice, gnucap).

The simulators are the outside reference here: what they compute from a card
is compared with modelgen's evaluator of their diode equations, and the
evaluator with the physics core. On a machine without a simulator these
tests skip, naming the package to install; in CI (CI=true) they must run.
"""

import json
import subprocess

import numpy as np
import pytest
from click.testing import CliRunner

from modelgen import cards, description, extraction
from modelgen.cards import reader
from modelgen.cli import main
from modelgen.spice import check, evaluator

from support import EXAMPLES, ROOT, need  # noqa: F401  (need is also imported from here)

#: which simulators read which dialect
READERS = {"spice3": ("ngspice", "gnucap"), "ngspice": ("ngspice",), "gnucap": ("gnucap",)}



def derive(path):
    device, raw = description.load_with_inputs(path)
    return extraction.derive(device), raw


@pytest.fixture(scope="module")
def example_results():
    return {p.name: derive(p) for p in EXAMPLES}


def library(example_results, dialect):
    return cards.library([(None, r, 0, raw) for r, raw in example_results.values()], dialect=dialect)


@pytest.mark.parametrize("dialect,simulator", [(d, s) for d, sims in READERS.items() for s in sims])
def test_every_example_card_loads_cleanly_and_matches_the_evaluator(example_results, dialect, simulator):
    need(simulator)
    outcomes = check.check_text(library(example_results, dialect), [simulator])
    assert {o.model for o in outcomes} == {r.device.name[0] for r, _ in example_results.values()}
    for o in outcomes:
        assert o.messages == [], (o.model, o.messages)
        assert o.dc_error <= 1e-3 and o.cap_error <= 1e-3, o


def test_evaluator_matches_the_physics_core_at_low_injection(example_results):
    # Physics core: diffusion + the Sah-Noyce-Shockley recombination integral over the depletion field at
    # V, depletion capacitance eps A / W(V). Evaluator: what ngspice computes from the ngspice card (GMIN
    # and RS taken out). The card's ISR, NR are a least-squares fit of ngspice's recombination form to the
    # integral over 0.1-0.6 V; the forms differ in shape by a few percent (test_recombination holds them
    # within 20 % where recombination dominates); hence the 10 % bound on current.
    v = np.array([0.1, 0.15, 0.2, 0.3, 0.4])
    for r, _ in example_results.values():
        values, _ = cards.card_values(r, 0, "ngspice")
        card = dict(values)
        card["RS"] = 0.0
        i_eval, _ = evaluator.junction_current(card, v, "ngspice", gmin=0.0)
        i_phys = extraction.predicted_current(r, v)[0]
        # low injection: well below the knee, where I / (1 + sqrt(I/IKF)) differs from I by < 0.5 %
        low = i_phys < 2.5e-5 * card["IKF"]
        assert low.sum() >= 2
        np.testing.assert_allclose(i_eval[low], i_phys[low], rtol=0.1)
        vr = np.array([0.0, -1.0, -5.0])
        c_eval = evaluator.capacitance(card, vr, "ngspice", gmin=0.0)
        c_phys = extraction.predicted_capacitance(r, vr)[0]
        # in reverse bias the diffusion part TT dI/dV is negligible; at 0 V it adds TT IS/Vt,
        # 0.1 % of the total for the long-lifetime photodiode
        np.testing.assert_allclose(c_eval[1:], c_phys[1:], rtol=1e-3)
        np.testing.assert_allclose(c_eval[0], c_phys[0], rtol=1e-2)


def test_ngspice_and_gnucap_agree_on_the_spice3_card(example_results):
    need("ngspice")
    need("gnucap")
    from modelgen.spice import gnucap, ngspice
    text = library(example_results, "spice3")
    names = [c.name for c in reader.read_cards(text)]
    rs = {c.name: c.params["RS"] for c in reader.read_cards(text)}
    a = ngspice.simulate(text, names, check.DC_VOLTS, check.CAP_VOLTS, rs=rs, gmin=1e-20)
    b = gnucap.simulate(text, names, check.DC_VOLTS, check.CAP_VOLTS, rs=rs)
    for n in names:
        # the two simulators use different k and q (CODATA 2014 vs. SPICE's old values); at 0.8 V
        # that alone moves exp(qV/kT) by under 0.1 %
        np.testing.assert_allclose(a[n]["current"], b[n]["current"], rtol=1e-3)
        np.testing.assert_allclose(a[n]["capacitance"], b[n]["capacitance"], rtol=1e-4)


def _ngspice_curves(text, name, rs):
    from modelgen.spice import ngspice
    r = ngspice.simulate(text, [name], check.DC_VOLTS, check.CAP_VOLTS, rs={name: rs})
    return r[name]


def test_hand_written_card_from_json_gives_the_same_ngspice_curves(tmp_path):
    need("ngspice")
    example = ROOT / "examples" / "switching_diode.toml"
    out = CliRunner().invoke(main, ["card", str(example), "--format", "json", "-q"])
    j = json.loads(out.stdout)
    p = j["params"]
    # written by hand the way an engineer would: SPICE suffixes, one line, lower case
    hand = (f".model handmade d is={p['IS'] * 1e15!r}f n={p['N']!r} rs={p['RS']!r} "
            f"cjo={p['CJO'] * 1e12!r}p vj={p['VJ']!r} m={p['M']!r} fc={p['FC']!r} "
            f"tt={p['TT'] * 1e9!r}n bv={p['BV']!r} ibv={p['IBV'] * 1e3!r}m eg={p['EG']!r} "
            f"xti={p['XTI']!r} tnom=27\n")
    ours = CliRunner().invoke(main, ["card", str(example), "-q"]).stdout
    a = _ngspice_curves(ours, j["name"], p["RS"])
    b = _ngspice_curves(hand, "handmade", p["RS"])
    np.testing.assert_allclose(a["current"], b["current"], rtol=1e-9)
    np.testing.assert_allclose(a["capacitance"], b["capacitance"], rtol=1e-9)
    assert a["messages"] == [] and b["messages"] == []


def test_check_command_reports_and_exits(tmp_path, example_results):
    need("ngspice")
    good = tmp_path / "good.lib"
    good.write_text(library(example_results, "ngspice"))
    r = CliRunner().invoke(main, ["check", str(good), "--simulator", "ngspice"])
    assert r.exit_code == 0, r.output
    assert f"{len(EXAMPLES)} of {len(EXAMPLES)} checks passed" in r.stdout
    # a parameter ngspice does not know: it warns, and check fails with status 1
    bad = tmp_path / "bad.lib"
    bad.write_text(".model DODD D (IS=1e-15 RS=1 CJO=1e-12 VJSW=0.8)\n")
    r = CliRunner().invoke(main, ["check", str(bad), "--simulator", "ngspice"])
    assert r.exit_code == 1
    assert "WARNING" in r.stdout and "vjsw" in r.stdout.lower()


def test_check_without_simulator_exits_3(tmp_path, monkeypatch):
    monkeypatch.setattr(check, "installed", lambda s: False)
    f = tmp_path / "x.lib"
    f.write_text(".model DX D (IS=1e-15)\n")
    r = CliRunner().invoke(main, ["check", str(f)])
    assert r.exit_code == 3
    assert "not installed (Debian package: ngspice)" in r.stderr


def test_section_library_loads_in_ngspice(tmp_path, example_results):
    need("ngspice")
    text = cards.library([("typical", r, 0, raw) for r, raw in example_results.values()], dialect="ngspice")
    lib = tmp_path / "corners.lib"
    lib.write_text(text)
    names = [r.device.name[0] for r, _ in example_results.values()]
    deck = tmp_path / "use.cir"
    body = "\n".join(f"V{k} a{k} 0 0.6\nD{k} a{k} 0 {n}" for k, n in enumerate(names))
    deck.write_text(f"section test\n.lib {lib} typical\n{body}\n.control\nop\n"
                    + "".join(f"print i(V{k})\n" for k in range(len(names))) + ".endc\n.end\n")
    out = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=60)
    log = out.stdout + out.stderr
    assert "warning" not in log.lower() and "error" not in log.lower(), log
    assert log.count("i(v") >= len(names)
    # the outcomes of check agree section by section
    outcomes = check.check_text(text, ["ngspice"])
    assert all(o.ok and o.section == "typical" for o in outcomes)


def test_hostile_name_or_file_name_cannot_run_a_control_line(tmp_path):
    need("ngspice")
    marker = tmp_path / "pwned"
    hostile = f"\n.control\nshell touch {marker}\n.endc\n"
    # a hostile model name is refused outright
    dev = tmp_path / "dev.toml"
    base = (ROOT / "examples" / "switching_diode.toml").read_text()
    dev.write_text(base.replace('name = "DSW_DEMO"', 'name = ' + json.dumps("D1" + hostile)))
    r = CliRunner().invoke(main, ["card", str(dev), "-o", str(tmp_path / "x.lib")])
    assert r.exit_code == 2 and "valid model name" in r.stderr
    assert not (tmp_path / "x.lib").exists()
    # a hostile file name reaches the header only as comment lines
    sneaky = tmp_path / ("dev" + hostile.replace("/", "_") + ".toml")
    sneaky.write_text(base)
    out = CliRunner().invoke(main, ["card", str(sneaky), "-q"]).stdout
    assert all(ln == "" or ln.startswith(("* ", ".model ", "+ ")) for ln in out.splitlines())
    deck = tmp_path / "deck.cir"
    deck.write_text("hostile\n" + out + "V1 a 0 0.5\nD1 a 0 DSW_DEMO\n.op\n.end\n")
    subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=60, cwd=tmp_path)
    assert not marker.exists()


def test_check_never_runs_what_a_file_carries_besides_cards(tmp_path):
    need("ngspice")
    marker = tmp_path / "ran"
    f = tmp_path / "x.lib"
    f.write_text(f".model DX D (IS=1e-15 RS=1 CJO=1e-12)\n.control\nshell touch {marker}\n.endc\n")
    r = CliRunner().invoke(main, ["check", str(f), "--simulator", "ngspice"])
    assert r.exit_code == 0, r.output
    assert not marker.exists()
