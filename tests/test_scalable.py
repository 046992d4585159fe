"""The scalable card (one model, the instance's area and pj) against ngspice and the per-device cards."""

from __future__ import annotations

import subprocess
import tomllib

import numpy as np
import pytest
from support import ROOT, need

from modelgen import cards, description, extraction, scalable

BASE = tomllib.loads((ROOT / "examples" / "switching_diode.toml").read_text())
NAME = BASE["name"]
FORWARD = [0.3, 0.4, 0.5, 0.6, 0.7, 0.8]
REVERSE = [-1.0, -5.0]
CV = [0.0, -1.0, -5.0]
#: Rectangles w x l [m]: the brief's three, and one large enough that the sidewall's share is under 1 %.
GEOMETRIES = [(10e-6, 10e-6), (100e-6, 100e-6), (10e-6, 1000e-6), (1000e-6, 1000e-6)]


def _description(area, perimeter, contact=False, **more):
    table = dict(BASE, area=f"{area!r} m^2", perimeter=f"{perimeter!r} m", **more)
    if not contact:
        table.pop("contact_resistance")
    return description.from_mapping(table)


def _ngspice(text, instance, tmp_path, element="D1", current="@d1[id]"):
    """ngspice's own junction currents at FORWARD + REVERSE and AC capacitances at CV of `D1 a 0 NAME instance`.

    The DC current is the diode's own (``@d1[id]``, 12 digits): at -5 V through a 0.01 ohm RS the
    terminal current is below the round-off of the node voltages.
    GMIN is set to 1e-25 S so the reverse current is the card's own (at ngspice's default 1e-12 S the
    conductance across the junction, 1e-12 A at -1 V, would hide a saturation current of 1e-16 A).
    """
    k = len(list(tmp_path.glob("*.cir")))
    lib, deck = tmp_path / f"card{k}.lib", tmp_path / f"deck{k}.cir"
    lib.write_text(text)
    lines = ["* scalable check", ".options gmin=1e-25 abstol=1e-20", f".include {lib}", "V1 a 0 dc 0 ac 1",
             f"{element} a 0 {NAME} {instance}", ".control", "set numdgt=12"]
    for v in FORWARD + REVERSE:
        lines += [f"alter V1 dc = {v!r}", "op", f"let x = {current}", "print x"]
    for v in CV:
        lines += [f"alter V1 dc = {v!r}", "ac lin 1 1e3 1e3", "let x = imag(-i(V1))/(2*pi*1e3)", "print x"]
    lines += [".endc", ".end"]
    deck.write_text("\n".join(lines) + "\n")
    done = subprocess.run(["ngspice", "-b", str(deck)], check=False, capture_output=True, text=True, timeout=60)
    assert "rror" not in done.stdout + done.stderr, done.stdout + done.stderr
    assert "unrecognized" not in done.stdout + done.stderr, done.stdout + done.stderr
    values = np.array([float(line.split("=")[1]) for line in done.stdout.splitlines() if line.startswith("x = ")])
    assert len(values) == len(FORWARD) + len(REVERSE) + len(CV), done.stdout
    n = len(FORWARD)
    return values[:n], values[n:n + len(REVERSE)], values[n + len(REVERSE):]


@pytest.fixture(scope="module")
def compared(tmp_path_factory):
    """For each geometry: (sidewall share, scalable/per-device - 1 forward, reverse, C-V), both in ngspice."""
    need("ngspice")
    tmp = tmp_path_factory.mktemp("scalable")
    ref = extraction.derive(_description(2.5e-9, 200e-6))
    text = scalable.scalable_card(ref, 0)
    out = []
    for w, l in GEOMETRIES:
        a, p = w * l, 2 * (w + l)
        per_device = _ngspice(cards.card(extraction.derive(_description(a, p)), 0, "ngspice"), "", tmp)
        scaled = _ngspice(text, f"area={a!r} pj={p!r}", tmp)
        xj = 0.8e-6  # the example's junction depth
        share = p * xj / (a + p * xj)
        out.append((share, *[s / d - 1 for s, d in zip(scaled, per_device)]))
    return out


def test_scalable_card_gives_the_per_device_capacitance_and_reverse_current(compared):
    """ngspice 39 (the simulator itself): at 10x10, 100x100, 10x1000 and 1000x1000 um the scalable card with
    area= and pj= gives the per-device card's C-V (0, -1, -5 V) and reverse current (-1, -5 V) within 1 %."""
    for share, forward, reverse, cv in compared:
        assert np.all(np.abs(cv) < 0.01), cv
        assert np.all(np.abs(reverse) < 0.01), reverse


@pytest.fixture(scope="module")
def compared_subckt(tmp_path_factory):
    """As `compared`, for the subcircuit form (`X1 a 0 NAME area= pj=`, the inner diode's current)."""
    need("ngspice")
    tmp = tmp_path_factory.mktemp("scalable_subckt")
    text = scalable.scalable_subckt(extraction.derive(_description(2.5e-9, 200e-6)), 0)
    out = []
    for w, l in GEOMETRIES:
        a, p = w * l, 2 * (w + l)
        per_device = _ngspice(cards.card(extraction.derive(_description(a, p)), 0, "ngspice"), "", tmp)
        scaled = _ngspice(text, f"area={a!r} pj={p!r}", tmp, element="X1", current="@d.x1.d1[id]")
        out.append([s / d - 1 for s, d in zip(scaled, per_device)])
    return out


def test_scalable_subckt_gives_the_per_device_card_at_every_geometry(compared_subckt):
    """ngspice 39 (the simulator itself): the subcircuit form, one diode of junction area area + pj*xj behind
    RS A / area, gives the per-device card's forward current (0.3-0.8 V, recombination, diffusion and the
    knee), reverse current and C-V within 1 % at 10x10, 100x100, 10x1000 and 1000x1000 um (the per-device
    card's equations are the same sums, so the differences are round-off). A contact resistance in ohms does
    not scale with the junction, and the card's note says so (test_contact_resistance_warns...)."""
    for forward, reverse, cv in compared_subckt:
        for part in (forward, reverse, cv):
            assert np.all(np.abs(part) < 0.01), part


def test_forward_current_loses_at_most_the_sidewall_share(compared):
    """ngspice scales ISR and IKF by area alone (measured, module docstring): the forward current of
    0.3-0.8 V is within 1 % where the sidewall's share of the junction is under 1 % (1000x1000 um), and
    elsewhere off by no more than that share, the bound the card's note states."""
    for share, forward, reverse, cv in compared:
        assert np.all(np.abs(forward) <= share), (share, forward)
        if share < 0.01:
            assert np.all(np.abs(forward) < 0.01), forward
    assert any(share < 0.01 for share, *_ in compared)


def test_ngspice_scales_as_the_module_says(tmp_path):
    """ngspice 39 (the simulator itself): area multiplies IS, ISR, IKF and CJO and divides RS; pj multiplies
    JSW and CJSW and leaves ISR alone."""
    need("ngspice")
    plain = (".model {n} D (IS={is_} JSW={jsw} ISR={isr} IKF={ikf} RS={rs} CJO={cjo} CJSW={cjsw} PJ={pj} "
             "TNOM=27)\n")
    unit = {"is_": 1e-15, "jsw": 2e-16, "isr": 1e-12, "ikf": 1e-2, "rs": 10.0, "cjo": 1e-12, "cjsw": 3e-13}
    scaled = _ngspice(plain.format(n=NAME, pj=0.0, **unit), "area=3 pj=7", tmp_path)
    by_hand = _ngspice(plain.format(n=NAME, pj=7.0, is_=3e-15, jsw=2e-16, isr=3e-12, ikf=3e-2, rs=10.0 / 3,
                                    cjo=3e-12, cjsw=3e-13), "", tmp_path)
    for s, h in zip(scaled, by_hand):
        np.testing.assert_allclose(s, h, rtol=1e-9)


def test_per_area_values_do_not_depend_on_the_description_area():
    """A neutral region's width does not change with area, so every per-unit value is a process constant
    (Sze & Ng, Physics of Semiconductor Devices, 3rd ed., ch. 2: J0, Cj per area; R = W / (q N mu A))."""
    small, _ = scalable.scalable_params(extraction.derive(_description(2.5e-9, 200e-6)), 0)
    large, _ = scalable.scalable_params(extraction.derive(_description(4e-8, 200e-6)), 0)
    assert small.keys() == large.keys() and {"IS", "JSW", "CJO", "CJSW", "ISR", "IKF", "RS"} <= small.keys()
    for k in small:
        assert large[k] == pytest.approx(small[k], rel=1e-12, abs=0), k


def test_tiny_geometry_warns_that_the_sidewall_dominates():
    """2x2 um with a 0.8 um junction depth: P xj = 6.4 um^2 against 4 um^2 of bottom (common practice: the
    planar-strip sidewall model is doubtful there)."""
    _, notes = scalable.scalable_params(extraction.derive(_description(4e-12, 8e-6)), 0)
    text = " ".join(notes)
    assert "planar strip" in text and "sidewall share" in text and "spreading lengths" in text
    _, quiet = scalable.scalable_params(extraction.derive(_description(1e-6, 4e-3)), 0)
    assert not any("planar strip" in n or "spreading" in n for n in quiet)


def test_contact_resistance_warns_and_is_carried_per_area():
    """A contact resistance in ohms does not scale with the junction (common practice); the card carries it
    as a specific resistivity Rc A and says so."""
    with_contact, notes = scalable.scalable_params(extraction.derive(_description(2.5e-9, 200e-6, contact=True)), 0)
    without, quiet = scalable.scalable_params(extraction.derive(_description(2.5e-9, 200e-6)), 0)
    assert any("contact resistance 1.5 ohm does not scale" in n for n in notes)
    assert not any("contact" in n for n in quiet)
    assert with_contact["RS"] - without["RS"] == pytest.approx(1.5 * 2.5e-9, rel=1e-9)


def test_card_header_gives_instance_syntax_and_units_as_comments():
    text = scalable.scalable_card(extraction.derive(_description(2.5e-9, 200e-6, contact=True)), 0)
    head, _, body = text.partition(f".model {NAME} D (")
    assert f"* instance: D1 a k {NAME} area=<bottom area, m^2> pj=<perimeter, m>" in head
    assert "the sidewall's share P xj / (A + P xj)" in head
    assert "IS [A/m^2]" in head and "JSW [A/m]" in head and "RS [ohm*m^2]" in head
    assert all(line.startswith("* ") or not line.strip() for line in head.splitlines())
    assert not any(line.startswith(("*#", "*>")) for line in text.splitlines())
    assert "PJ=" not in body and "AREA=" not in body
    params = dict(line[2:].split("=") for line in body.splitlines() if "=" in line)
    assert float(params["RS"]) > 0 and float(params["JSW"]) > 0


def test_dialect_without_a_scalable_form_is_refused():
    r = extraction.derive(_description(2.5e-9, 200e-6))
    with pytest.raises(ValueError, match="no scalable form"):
        scalable.scalable_params(r, 0, "gnucap")


def test_check_runs_a_scalable_card_at_its_reference_instance(tmp_path):
    """`card --scalable` writes per-unit values that no simulator check could take as they are (IKF of
    megaamperes per m^2); `check` runs the card as a 100 x 100 um instance of it, in ngspice, and passes. The
    instance's totals are what the ordinary card of that geometry says (saturation current and zero-bias
    capacitance, bottom plus sidewall, within 1e-9)."""
    from modelgen.spice import check
    from support import run

    need("ngspice")
    out = tmp_path / "scalable.lib"
    res = run("card", ROOT / "examples" / "switching_diode.toml", "--scalable", "--dialect", "ngspice", "-q",
              "-o", out)
    assert res.exit_code == 0, res.output
    res = run("check", out)
    assert res.exit_code == 0, res.output
    (card,) = check.diode_cards(out.read_text())
    area, pj = check.SCALABLE_REFERENCE
    table = description.load(ROOT / "examples" / "switching_diode.toml")
    mapping = {"name": "DREF", "area": f"{area * 1e12} um^2", "perimeter": f"{pj * 1e6} um",
               "junction_depth": f"{table.junction_depth[0] * 1e6} um",
               "p": {"doping": f"{table.p.doping[0] / 1e6} cm^-3", "thickness": f"{table.p.thickness[0] * 1e6} um",
                     "lifetime": f"{table.p.lifetime[0] * 1e9} ns"},
               "n": {"doping": f"{table.n.doping[0] / 1e6} cm^-3", "thickness": f"{table.n.thickness[0] * 1e6} um",
                     "lifetime": f"{table.n.lifetime[0] * 1e9} ns"}}
    ref = extraction.derive(description.from_mapping(mapping))
    total_is = card.params["IS"] + card.params["JSW"] * card.params["PJ"]
    total_c = card.params["CJO"] + card.params["CJSW"] * card.params["PJ"]
    assert total_is == pytest.approx(ref.params["IS"][0], rel=1e-9)
    assert total_c == pytest.approx(ref.params["CJO"][0], rel=1e-9)


def test_check_runs_a_scalable_subckt_at_its_default_instance(tmp_path):
    """`card --scalable --form subckt` writes a subcircuit whose diode check runs as the default instance
    (100 x 100 um) sees it; it passes in ngspice, and the reader takes the subcircuit's four numbers."""
    from modelgen.cards import reader
    from support import run

    need("ngspice")
    out = tmp_path / "scalable.lib"
    res = run("card", ROOT / "examples" / "switching_diode.toml", "--scalable", "--form", "subckt", "-q", "-o", out)
    assert res.exit_code == 0, res.output
    text = out.read_text()
    assert f"* instance: X1 a k {NAME} area=<bottom area, m^2> pj=<perimeter, m>" in text
    assert not any(line.startswith(("*#", "*>")) for line in text.splitlines())
    (card,) = reader.read_cards(text)
    assert card.scaling["area"] == pytest.approx(1e-8) and card.scaling["pj"] == pytest.approx(4e-4)
    assert card.scaling["xj"] == pytest.approx(0.8e-6) and card.scaling["rsa"] > 0
    res = run("check", out)
    assert res.exit_code == 0 and " ok" in res.output, res.output


def test_a_subckt_not_in_the_scalable_form_has_no_scaling():
    """Only modelgen's exact form is read as scalable: another element, or a diode of another area, is not."""
    from modelgen.cards import reader

    base = (".subckt D a k area=1e-8 pj=4e-4\nR1 a j {1e-8/area}\nD1 j k D area={area+pj*1e-6}\n"
            ".model D D (IS=1e-3)\n.ends D\n")
    assert reader.read_cards(base)[0].scaling == {"area": 1e-8, "pj": 4e-4, "xj": 1e-6, "rsa": 1e-8}
    for changed in (base.replace("{area+pj*1e-6}", "{area}"), base.replace(".model", "R2 a k 1\n.model"),
                    base.replace("R1 a j", "R1 a k")):
        assert reader.read_cards(changed)[0].scaling is None
