"""Drivers' hours: the bundled limits, leg timing, and user rule files.

Limits checked against Regulation (EC) No 561/2006 (Art. 6(1) daily driving,
Art. 7 breaks) and 49 CFR 395.3 ((a)(2) duty window, (a)(3)(i) driving,
(a)(3)(ii) break), as listed in the project's trade facts; the article and
paragraph numbers are from memory there. The US limits agree with FMCSA's
Motor Carrier Safety Planner, section 6.4.2 (11 h driving in a 14 h window,
30 min break after 8 h of driving).
"""

from __future__ import annotations

import itertools
import math
from importlib import resources
from pathlib import Path

import numpy as np
import pytest

from hubnet.errors import InputError
from hubnet.fleet import LongLegPolicy
from hubnet.hours import DrivingRules, LegTiming, load_rules, time_leg, time_legs

EU = load_rules("eu")
US = load_rules("us")
RELAY_H = 0.25  # 15 min per driver change: an input of the model, not a regulation
POLICIES: tuple[LongLegPolicy, ...] = ("relay", "two_drivers", "forbid")


def _write(tmp_path: Path, text: str, name: str = "rules.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


# --------------------------------------------------------------------------- bundled limits


def test_eu_limits_are_those_of_regulation_561_2006() -> None:
    # Art. 7: a 45 min break after 4.5 h of driving; Art. 6(1): 9 h daily driving
    # (Regulation (EC) No 561/2006, from memory); no on-duty window in the Regulation.
    assert EU.max_driving_before_break_h == 4.5
    assert EU.break_h == 0.75
    assert EU.max_daily_driving_h == 9.0
    assert EU.max_duty_window_h is None
    assert EU.article("max_daily_driving_h").endswith("Art. 6(1)")
    assert EU.article("max_driving_before_break_h").endswith("Art. 7")
    assert "561/2006" in EU.source


def test_us_limits_are_those_of_49_cfr_395_3() -> None:
    # 49 CFR 395.3(a)(3)(ii): 30 min break after 8 h driving; (a)(3)(i): 11 h driving;
    # (a)(2): no driving after the 14th hour on duty (paragraphs from memory; limits
    # as in FMCSA's Motor Carrier Safety Planner 6.4.2).
    assert US.max_driving_before_break_h == 8.0
    assert US.break_h == 0.5
    assert US.max_daily_driving_h == 11.0
    assert US.max_duty_window_h == 14.0
    assert US.article("max_daily_driving_h") == "49 CFR 395.3(a)(3)(i)"
    assert US.article("max_driving_before_break_h") == "49 CFR 395.3(a)(3)(ii)"
    assert US.article("max_duty_window_h") == "49 CFR 395.3(a)(2)"


def test_rule_set_names_are_case_insensitive_and_files_are_package_data() -> None:
    assert load_rules(" EU ") == EU
    for name in ("eu_561_2006.toml", "us_49cfr395_3.toml"):
        assert resources.files("hubnet").joinpath("rules", name).is_file()
    pyproject = (Path(__file__).resolve().parent.parent / "pyproject.toml").read_text()
    assert '"rules/*.toml"' in pyproject and '"py.typed"' in pyproject


def test_rules_are_frozen() -> None:
    with pytest.raises(AttributeError):
        EU.break_h = 0.5  # type: ignore[misc]


# --------------------------------------------------------------------------- one leg


def test_eu_5h_needs_one_45min_break() -> None:
    # Art. 7: 5 h > 4.5 h, so one 45 min break: ceil(5 / 4.5) - 1 = 1 break of 0.75 h;
    # transit 5 + 0.75 = 5.75 h.
    t = time_leg(5.0, EU, "forbid", RELAY_H)
    assert (t.allowed, t.drivers, t.relays) == (True, 1, 0)
    assert t.breaks_h == pytest.approx(0.75)
    assert t.transit_h == pytest.approx(5.75)


def test_eu_4_5h_exactly_needs_no_break() -> None:
    # Art. 7: the break is due after 4.5 h of driving; a run that ends at 4.5 h
    # needs none: ceil(4.5 / 4.5) - 1 = 0.
    t = time_leg(4.5, EU, "forbid", RELAY_H)
    assert t.breaks_h == 0.0
    assert t.transit_h == 4.5


def test_eu_9h_exactly_is_one_driver_with_one_break() -> None:
    # Art. 6(1): 9 h is the daily limit, so allowed; Art. 7: 4.5 h + break + 4.5 h,
    # ceil(9 / 4.5) - 1 = 1 break; transit 9 + 0.75 = 9.75 h.
    t = time_leg(9.0, EU, "forbid", RELAY_H)
    assert (t.allowed, t.drivers, t.relays) == (True, 1, 0)
    assert t.breaks_h == pytest.approx(0.75)
    assert t.transit_h == pytest.approx(9.75)


def test_rounding_noise_at_a_limit_does_not_add_a_break_or_forbid() -> None:
    # 90 x 0.1 h sums to 8.99999999999998 in floating point; 90 x 0.1 h and 9.0 h
    # must time alike (Art. 6(1), Art. 7 as above); 9.01 h is over the 9 h limit.
    noisy = sum([0.1] * 90)
    assert noisy != 9.0
    assert time_leg(noisy, EU, "forbid", RELAY_H).breaks_h == pytest.approx(0.75)
    assert time_leg(9.0 + 1e-12, EU, "forbid", RELAY_H).allowed
    assert not time_leg(9.01, EU, "forbid", RELAY_H).allowed


def test_eu_12h_relay_is_a_full_day_and_the_rest() -> None:
    # Art. 6(1): 12 h > 9 h; ceil(12 / 9) = 2 stints, 1 driver change.
    # Art. 7: the first driver drives 9 h with ceil(9 / 4.5) - 1 = 1 break, the
    # second, fresh, drives the last 3 h with none: 0.75 h of breaks. (Two equal
    # 6 h stints would need a break each: 1.5 h.) Transit 12 + 0.75 + 0.25 = 13 h.
    t = time_leg(12.0, EU, "relay", RELAY_H)
    assert (t.allowed, t.drivers, t.relays) == (True, 1, 1)
    assert t.breaks_h == pytest.approx(0.75)
    assert t.transit_h == pytest.approx(13.0)
    assert "2 stints (9 h, 3 h)" in t.note


def test_eu_19h_relay_is_three_stints() -> None:
    # ceil(19 / 9) = 3 stints (Art. 6(1)). Stints of 9, 9 and 1 h take 1 + 1 + 0
    # breaks (Art. 7): 1.5 h; no split does better, as 3 stints with one break in
    # all cover at most 4.5 + 4.5 + 9 = 18 h < 19 h. 2 changes. Transit
    # 19 + 1.5 + 0.5 = 21 h (equal stints of 6.33 h: a break each, 21.75 h).
    t = time_leg(19.0, EU, "relay", RELAY_H)
    assert (t.relays, t.drivers) == (2, 1)
    assert t.breaks_h == pytest.approx(1.5)
    assert t.transit_h == pytest.approx(21.0)


def test_us_20h_relay_needs_a_break_in_each_stint() -> None:
    # 395.3(a)(3)(i): 20 h > 11 h, ceil(20 / 11) = 2 stints. 395.3(a)(3)(ii): a
    # stint without a break lasts at most 8 h, so 8 + 11 = 19 h < 20 h and both
    # stints need their 0.5 h break (11 h + 9 h): 1 h. Transit 20 + 1 + 0.25.
    t = time_leg(20.0, US, "relay", RELAY_H)
    assert (t.relays, t.breaks_h) == (1, pytest.approx(1.0))
    assert t.transit_h == pytest.approx(21.25)
    # 12 h: 8 h + 4 h, no break at all (Art. as above); transit 12.25 h.
    assert time_leg(12.0, US, "relay", RELAY_H).breaks_h == 0.0


def _fewest_breaks_by_grid(
    drive_h: float, stints: int, rules: DrivingRules, step: float = 0.25
) -> int:
    """Fewest breaks over every split of ``drive_h`` into ``stints`` legal stints, on a grid.

    Independent of hubnet's split: tries the lengths one by one (the last
    stint takes the rest) and counts each stint's breaks from the rule's
    limits directly.
    """
    best = math.inf

    def legal(t: float) -> int | None:
        if t > rules.max_daily_driving_h + 1e-9:
            return None
        n = max(0, math.ceil(t / rules.max_driving_before_break_h - 1e-9) - 1)
        window = rules.max_duty_window_h
        if window is not None and t + n * rules.break_h > window + 1e-9:
            return None
        return n

    def walk(left: float, k: int, spent: int) -> None:
        nonlocal best
        if k == 1:
            n = legal(left)
            if n is not None:
                best = min(best, spent + n)
            return
        for i in range(1, int(round(left / step))):
            t = i * step
            n = legal(t)
            if n is None:
                break
            walk(left - t, k - 1, spent + n)

    walk(drive_h, stints, 0)
    assert math.isfinite(best)
    return int(best)


@pytest.mark.parametrize("rules", [EU, US], ids=["eu", "us"])
def test_relay_breaks_are_the_fewest_any_split_gives(rules: DrivingRules) -> None:
    # The limits are the published ones (Art. 6(1) and 7 of Regulation (EC) No
    # 561/2006; 49 CFR 395.3(a)(2), (a)(3)); the grid search above is the check.
    for drive in np.arange(9.5, 30.0, 0.35):
        t = time_leg(float(drive), rules, "relay", RELAY_H)
        want = _fewest_breaks_by_grid(float(round(drive, 2)), t.relays + 1, rules)
        assert t.breaks_h == pytest.approx(want * rules.break_h), (rules.name, drive)


def test_eu_relay_at_twice_the_limit_is_two_full_days() -> None:
    # 18 h = 2 x 9 h exactly: 2 stints (not 3), each 9 h with 1 break (Art. 6(1), Art. 7).
    t = time_leg(18.0, EU, "relay", 0.0)
    assert t.relays == 1
    assert t.breaks_h == pytest.approx(1.5)


def test_us_11h_is_allowed_with_one_30min_break() -> None:
    # 395.3(a)(3)(i): 11 h is the limit; 395.3(a)(3)(ii): ceil(11 / 8) - 1 = 1 break
    # of 0.5 h; 11 + 0.5 = 11.5 h <= 14 h window (395.3(a)(2)).
    t = time_leg(11.0, US, "forbid", RELAY_H)
    assert (t.allowed, t.drivers, t.relays) == (True, 1, 0)
    assert t.breaks_h == pytest.approx(0.5)
    assert t.transit_h == pytest.approx(11.5)


def test_us_8h_exactly_needs_no_break() -> None:
    # 395.3(a)(3)(ii): the break is due after 8 h of driving: ceil(8 / 8) - 1 = 0.
    assert time_leg(8.0, US, "forbid", RELAY_H).breaks_h == 0.0


def test_us_12h_forbidden_names_the_paragraph() -> None:
    # 395.3(a)(3)(i): 12 h > 11 h, and the policy forbids long legs.
    t = time_leg(12.0, US, "forbid", RELAY_H)
    assert not t.allowed
    assert "395.3(a)(3)(i)" in t.note
    assert "11 h" in t.note
    assert math.isinf(t.transit_h)


def test_eu_forbidden_note_names_the_article() -> None:
    t = time_leg(10.0, EU, "forbid", RELAY_H)
    assert not t.allowed
    assert "Art. 6(1)" in t.note and "9 h" in t.note


def test_two_drivers_up_to_twice_the_daily_limit() -> None:
    # Multi-manning (Regulation (EC) No 561/2006, Art. 7 second paragraph, from
    # memory): the co-driver drives while the other takes the break, so no break
    # stops; two drivers share at most 2 x 9 = 18 h (Art. 6(1) for each).
    t17 = time_leg(17.0, EU, "two_drivers", RELAY_H)
    assert (t17.allowed, t17.drivers, t17.relays, t17.breaks_h) == (True, 2, 0, 0.0)
    assert t17.transit_h == 17.0
    assert time_leg(18.0, EU, "two_drivers", RELAY_H).allowed
    t19 = time_leg(19.0, EU, "two_drivers", RELAY_H)
    assert not t19.allowed
    assert "18 h" in t19.note and "Art. 6(1)" in t19.note


def test_two_drivers_only_on_legs_too_long_for_one() -> None:
    # 8 h fits one driver (Art. 6(1)): one driver, ceil(8 / 4.5) - 1 = 1 break (Art. 7).
    t = time_leg(8.0, EU, "two_drivers", RELAY_H)
    assert (t.drivers, t.breaks_h) == (1, 0.75)


def test_zero_drive_is_a_zero_hour_leg() -> None:
    t = time_leg(0.0, US, "relay", RELAY_H)
    assert (t.breaks_h, t.relays, t.transit_h) == (0.0, 0, 0.0)


def test_bad_arguments_raise() -> None:
    with pytest.raises(ValueError, match="driving time"):
        time_leg(-1.0, EU, "relay", RELAY_H)
    with pytest.raises(ValueError, match="driving time"):
        time_leg(float("nan"), EU, "relay", RELAY_H)
    with pytest.raises(ValueError, match="policy"):
        time_leg(1.0, EU, "swap", RELAY_H)  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="relay time"):
        time_leg(1.0, EU, "relay", -0.1)


# --------------------------------------------------------------------------- duty window


TIGHT_WINDOW = """\
name = "tight window"
max_driving_before_break_h = 8
break_h = 0.5
max_daily_driving_h = 11
max_duty_window_h = 11.2
"""


def test_a_tight_duty_window_limits_one_driver_and_adds_stints(tmp_path: Path) -> None:
    # Hand-made limits: 8 h before a 0.5 h break, 11 h driving, 11.2 h window.
    rules = load_rules(_write(tmp_path, TIGHT_WINDOW))
    # 10.7 h: 10.7 + 1 break x 0.5 = 11.2 h <= 11.2 h window: one driver.
    assert time_leg(10.7, rules, "forbid", RELAY_H).allowed
    # 10.9 h: within 11 h of driving but 10.9 + 0.5 = 11.4 h > 11.2 h window.
    t = time_leg(10.9, rules, "forbid", RELAY_H)
    assert not t.allowed
    assert "duty window" in t.note and "11.2 h" in t.note
    # Relay: ceil(10.9 / 11) = 1 stint does not fit, so 2 stints (8 h and 2.9 h), no
    # break in either (ceil(8 / 8) - 1 = 0); transit 10.9 + 0.25 = 11.15 h.
    r = time_leg(10.9, rules, "relay", RELAY_H)
    assert (r.allowed, r.relays, r.breaks_h) == (True, 1, 0.0)
    assert r.transit_h == pytest.approx(11.15)


ODD_LIMITS = """\
name = "odd limits"
max_driving_before_break_h = 3.3
break_h = 0.5
max_daily_driving_h = 10
max_duty_window_h = 11
"""


@pytest.mark.parametrize("text", [TIGHT_WINDOW, ODD_LIMITS], ids=["tight-window", "odd-limits"])
def test_relay_breaks_are_the_fewest_under_a_tight_duty_window(tmp_path: Path, text: str) -> None:
    # Hand-made limits (no source) where the duty window, not the daily limit,
    # bounds a stint: 10.7 h with one break (tight window), 9.9 h with two (odd
    # limits: 10 h would need three, 11.5 h on duty). Two stints each; the grid
    # search (0.05 h, as 10.7 and 3.3 are not multiples of 0.25) is the check.
    rules = load_rules(_write(tmp_path, text))
    for drive in np.arange(11.0, 19.7, 0.3):
        t = time_leg(float(drive), rules, "relay", RELAY_H)
        assert t.relays == 1
        want = _fewest_breaks_by_grid(float(round(drive, 2)), 2, rules, step=0.05)
        assert t.breaks_h == pytest.approx(want * rules.break_h), (rules.name, drive)
        many = time_legs([float(drive)], rules, "relay", RELAY_H)
        assert many.breaks_h[0] == pytest.approx(t.breaks_h)


def test_relay_within_rounding_noise_of_a_window_is_timed_not_refused() -> None:
    # Hand-made limits (no source): a 0.3 h duty window, so each stint is at most
    # 0.3 h; 0.6 h + 1e-9 fits two stints within the one-driver check's tolerance.
    # Both timings must agree, with no negative break time (a review found the
    # vectorised one giving -1.5 h here).
    rules = DrivingRules("tiny window", "hand-made", 4.5, 0.75, 9.0, 0.3)
    t = time_leg(0.6 + 1e-9, rules, "relay", RELAY_H)
    many = time_legs([0.6 + 1e-9], rules, "relay", RELAY_H)
    assert (t.relays, t.breaks_h) == (1, 0.0)
    assert (int(many.relays[0]), float(many.breaks_h[0])) == (1, 0.0)


# --------------------------------------------------------------------------- many legs


def test_time_legs_agrees_with_time_leg(tmp_path: Path) -> None:
    # The vectorised timing must give, element by element, the scalar answers
    # (checked above against the regulations), including at exact multiples.
    tight = load_rules(_write(tmp_path, TIGHT_WINDOW))
    grid = np.unique(
        np.concatenate([np.linspace(0.0, 40.0, 401), [4.5, 8.0, 9.0, 10.7, 10.9, 11.0, 18.0]])
    )
    for rules, policy in itertools.product((EU, US, tight), POLICIES):
        many = time_legs(grid, rules, policy, RELAY_H)
        for i, drive in enumerate(grid):
            one = time_leg(float(drive), rules, policy, RELAY_H)
            got = (
                bool(many.allowed[i]),
                int(many.relays[i]),
                int(many.drivers[i]),
            )
            assert got == (one.allowed, one.relays, one.drivers), (rules.name, policy, drive)
            if one.allowed:
                assert many.breaks_h[i] == pytest.approx(one.breaks_h)
                assert many.transit_h[i] == pytest.approx(one.transit_h)
            else:
                assert math.isinf(many.transit_h[i])


def test_time_legs_keeps_the_shape() -> None:
    # [[5, 12], [19, 0]] h, EU relay: transit 5.75, 13, 21, 0 h (as in the
    # single-leg cases above).
    out = time_legs([[5.0, 12.0], [19.0, 0.0]], EU, "relay", RELAY_H)
    assert out.transit_h.shape == (2, 2)
    np.testing.assert_allclose(out.transit_h, [[5.75, 13.0], [21.0, 0.0]])
    np.testing.assert_array_equal(out.relays, [[0, 1], [2, 0]])
    assert time_legs(12.0, EU, "forbid", RELAY_H).allowed.shape == ()
    with pytest.raises(ValueError):
        time_legs([1.0, -2.0], EU, "relay", RELAY_H)


# --------------------------------------------------------------------------- rule files


def test_user_rule_file_with_edited_limit(tmp_path: Path) -> None:
    # A user copies the EU file and allows 10 h a day (the twice-weekly extension of
    # Art. 6(1)): 10 h is then one driver with ceil(10 / 4.5) - 1 = 2 breaks (Art. 7).
    text = resources.files("hubnet").joinpath("rules", "eu_561_2006.toml").read_text()
    text = text.replace("max_daily_driving_h = 9.0", "max_daily_driving_h = 10.0")
    rules = load_rules(str(_write(tmp_path, text)))
    assert rules.max_daily_driving_h == 10.0
    assert isinstance(rules, DrivingRules)
    t = time_leg(10.0, rules, "forbid", RELAY_H)
    assert isinstance(t, LegTiming)
    assert t.allowed and t.breaks_h == pytest.approx(1.5)


def test_user_rule_file_typo_names_the_key_with_did_you_mean(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        "max_driving_before_break_h = 4.5\nbreak_h = 0.75\nmax_daily_drving_h = 9\n",
    )
    with pytest.raises(InputError) as err:
        load_rules(path)
    problems = {p.column: p for p in err.value.problems}
    typo = problems["max_daily_drving_h"]
    assert "did you mean 'max_daily_driving_h'" in typo.message
    assert typo.row == 3
    assert typo.file == str(path)
    # The real key is then missing too: both are reported in one pass.
    assert "missing" in problems["max_daily_driving_h"].message


def test_user_rule_file_bad_values(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        "max_driving_before_break_h = 0\n"
        'break_h = "45 min"\n'
        "max_daily_driving_h = -9\n"
        "max_duty_window_h = 14\n"
        "[articles]\n"
        'max_daly_driving_h = "Art. 6"\n',
    )
    with pytest.raises(InputError) as err:
        load_rules(path)
    problems = {p.column: p for p in err.value.problems}
    assert problems["max_driving_before_break_h"].row == 1
    assert "greater than 0" in problems["max_driving_before_break_h"].message
    assert "number" in problems["break_h"].message
    assert "greater than 0" in problems["max_daily_driving_h"].message
    assert problems["articles.max_daly_driving_h"].row == 6
    assert "did you mean 'max_daily_driving_h'" in problems["articles.max_daly_driving_h"].message
    assert "max_duty_window_h" not in problems
    assert f"{path.name} line 1" in str(err.value)


def test_unknown_rule_set_name_and_bad_toml(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="did you mean 'eu'"):
        load_rules("euu")
    with pytest.raises(InputError, match="not found"):
        load_rules(tmp_path / "missing.toml")
    with pytest.raises(InputError, match="not valid TOML") as err:
        load_rules(_write(tmp_path, "break_h = 0.5\nmax_daily_driving_h = \n"))
    assert err.value.problems[0].row == 2
