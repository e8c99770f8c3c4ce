"""Hostile and careless inputs: each is refused (or accepted) with a plain message.

Every case goes through the command line (``assurance check``) as a user would meet it, and
checks four things: the exit code, the file's own key names in the message, the value shown
escaped (never a raw control character), and no traceback. Messages are this package's own;
the expected words come from the design-file reference (docs/design-file.md).
"""

from __future__ import annotations

import subprocess
import sys
import textwrap
import tomllib

import pytest

from assurance.cli import main

NORMAL_DESIGN = """\
[endpoint]
sd = 10.0
[design_prior]
family = "normal"
mean = 4.0
sd = 2.0
"""

#: raw control characters that must never reach the terminal
RAW_CONTROLS = [chr(c) for c in range(32) if c not in (9, 10)] + ["\x7f"] + [
    chr(c) for c in range(0x80, 0xA0)]


def _check(tmp_path, capsys, text: str | bytes, name: str = "design.toml"):
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    code = main(["check", str(path)])
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    for ch in RAW_CONTROLS:
        assert ch not in captured.err, repr(ch)
    return code, captured.out, captured.err


# ------------------------------------------------------------------------------------------
# 1. control characters and lengths
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(("escaped_in_toml", "shown"), [
    ("\\u001b[31mred", "'\\x1b'"),     # an ANSI colour sequence
    ("nul\\u0000here", "'\\x00'"),
    ("bell\\u0007", "'\\x07'"),
    ("line\\nbreak", "'\\n'"),
    ("del\\u007f", "'\\x7f'"),
    ("c1\\u0085next line", "'\\x85'"),
    ("csi\\u009b2J", "'\\x9b'"),
])
def test_a_title_with_a_control_character_is_refused_and_shown_escaped(
        tmp_path, capsys, escaped_in_toml, shown):
    code, _, err = _check(tmp_path, capsys, f'title = "{escaped_in_toml}"\n' + NORMAL_DESIGN)
    assert code == 2
    assert "'title' must be plain text on one line without control characters" in err
    assert shown in err


def test_a_title_with_a_tab_and_accents_is_accepted(tmp_path, capsys):
    code, out, _ = _check(tmp_path, capsys, 'title = "Zürich\\tpain – 試験"\n' + NORMAL_DESIGN)
    assert code == 0 and "ok" in out


def test_a_very_long_title_is_refused_with_its_length(tmp_path, capsys):
    # (a file of a million characters is refused for its size before it is parsed)
    code, _, err = _check(tmp_path, capsys, f'title = "{"x" * 900_000}"\n' + NORMAL_DESIGN)
    assert code == 2
    assert "'title' must be at most 200 characters. Got 900,000 characters" in err
    assert len(err) < 500  # the title is not echoed back in full


def test_a_million_character_title_is_refused_in_a_mapping_and_in_python():
    from assurance import ContinuousEndpoint, Normal, TrialDesign
    from assurance.design_file import parse_design
    from assurance.errors import AssuranceInputError, DesignFileError

    raw = tomllib.loads(NORMAL_DESIGN)
    with pytest.raises(DesignFileError, match=r"'title' must be at most 200 characters\. Got "
                       r"1,000,000 characters"):
        parse_design({**raw, "title": "x" * 1_000_000})
    with pytest.raises(AssuranceInputError, match=r"'title' parameter of TrialDesign must be at "
                       r"most 200 characters .* Got 1,000,000 characters"):
        TrialDesign(ContinuousEndpoint(10.0), Normal(4.0, 2.0), title="x" * 1_000_000)
    TrialDesign(ContinuousEndpoint(10.0), Normal(4.0, 2.0), title="x" * 200)  # the bound


@pytest.mark.parametrize("ch", ["\x00", "\x1b", "\n", "\r", "\x7f", "\x85", "\x9f", "\ud800"])
def test_trial_design_refuses_control_characters_in_its_title(ch):
    from assurance import ContinuousEndpoint, Normal, TrialDesign
    from assurance.errors import AssuranceInputError

    with pytest.raises(AssuranceInputError) as info:
        TrialDesign(ContinuousEndpoint(10.0), Normal(4.0, 2.0), title=f"Trial {ch} one")
    message = str(info.value)
    assert "'title' parameter of TrialDesign must be plain text without control characters" \
        in message
    assert f"character 7 is {ascii(ch)}" in message
    assert ch not in message


def test_a_blank_title_is_refused(tmp_path, capsys):
    code, _, err = _check(tmp_path, capsys, 'title = "   "\n' + NORMAL_DESIGN)
    assert code == 2 and "'title' must not be blank" in err


def test_an_unknown_key_with_control_characters_is_shown_escaped(tmp_path, capsys):
    text = NORMAL_DESIGN.replace("sd = 10.0", 'sd = 10.0\n"a\\u001b[2Jb" = 1')
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert "unknown key 'a\\x1b[2Jb' in [endpoint]" in err


def test_a_very_long_unknown_key_is_shortened(tmp_path, capsys):
    text = NORMAL_DESIGN + f'\n[monte_carlo]\n{"k" * 50_000} = 1\n'
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert "unknown key 'kkkk" in err and "...' in [monte_carlo]" in err
    assert len(err) < 600


def test_a_file_name_with_control_characters_is_shown_escaped(tmp_path, capsys):
    # no title: the title comes from the file name, made safe
    code, out, _ = _check(tmp_path, capsys, NORMAL_DESIGN, name="trial\x1b[31m.toml")
    assert code == 0
    assert "trial\\x1b[31m" in out
    code, _, err = _check(tmp_path, capsys, NORMAL_DESIGN + "colour = 1\n",
                          name="bad\x1bname.toml")
    assert code == 2 and "bad\\x1bname.toml" in err


def test_scipy_names_are_bounded_by_the_schema(tmp_path, capsys):
    text = NORMAL_DESIGN.replace('family = "normal"\nmean = 4.0\nsd = 2.0',
                                 f'family = "scipy"\nname = "{"n" * 5000}"')
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert "'design_prior.name' must be at most 40 characters. Got 5,000 characters" in err


def test_a_scipy_parameter_name_must_be_a_name(tmp_path, capsys):
    text = NORMAL_DESIGN.replace(
        'family = "normal"\nmean = 4.0\nsd = 2.0',
        'family = "scipy"\nname = "norm"\nparameters = { "lo\\u001bc" = 1.0 }')
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert "'design_prior.parameters' has a key that is not a name" in err
    assert "'lo\\x1bc'" in err


# ------------------------------------------------------------------------------------------
# 2 and 3. scipy priors: slow distributions and invalid parameters
# ------------------------------------------------------------------------------------------
def _scipy_design(name: str, parameters: str) -> str:
    return NORMAL_DESIGN.replace(
        'family = "normal"\nmean = 4.0\nsd = 2.0',
        f'family = "scipy"\nname = "{name}"\nparameters = {{ {parameters} }}')


@pytest.mark.parametrize("name", ["levy_stable", "studentized_range", "norminvgauss"])
def test_a_scipy_distribution_with_slow_functions_is_refused(tmp_path, capsys, name):
    parameters = {"levy_stable": "alpha = 1.5, beta = 0.0", "studentized_range":
                  "k = 3.0, df = 10.0", "norminvgauss": "a = 1.0, b = 0.5"}[name]
    code, _, err = _check(tmp_path, capsys, _scipy_design(name, parameters))
    assert code == 2
    assert f"'design_prior.name' = '{name}' cannot be used" in err
    assert "numerically at every point" in err and "docs/design-file.md lists them all" in err


@pytest.mark.parametrize(("name", "parameters", "words"), [
    ("norm", "loc = 0.0, scale = -1.0",
     ["'design_prior.parameters.scale' must be a finite number > 0. Got -1.0",
      "scipy.stats.norm takes loc, scale"]),
    ("norm", "loc = nan, scale = 1.0", ["'design_prior.parameters.loc' must be a finite number"]),
    ("gamma", "a = -1.0", ["'design_prior.parameters.a' must be a finite number > 0. Got -1.0",
                           "scipy.stats.gamma takes a, loc, scale"]),
    ("uniform", "loc = 0.0, scale = 0.0",
     ["'design_prior.parameters.scale' must be a finite number > 0. Got 0.0"]),
    ("gamma", "a = 2.0, shape = 3.0",
     ["'design_prior.parameters.shape' is not a parameter of scipy.stats.gamma",
      "takes a, loc, scale"]),
    ("gamma", "scale = 2.0", ["'design_prior.parameters.a' is required"]),
    ("truncnorm", "a = 2.0, b = 1.0",
     ["'design_prior.parameters' of scipy.stats.truncnorm do not fit together"]),
    ("beta", "a = 2.0, b = 0.0", ["'design_prior.parameters.b' must be a finite number > 0"]),
])
def test_invalid_scipy_parameters_are_named(tmp_path, capsys, name, parameters, words):
    code, _, err = _check(tmp_path, capsys, _scipy_design(name, parameters))
    assert code == 2
    for word in words:
        assert word in err, (word, err)
    assert "has no finite mean" not in err
    assert "_parse_args" not in err  # no internal function name


def test_a_valid_scipy_prior_is_accepted(tmp_path, capsys):
    code, out, _ = _check(tmp_path, capsys, _scipy_design("logistic", "loc = 4.0, scale = 1.0"))
    assert code == 0 and "ok" in out


# ------------------------------------------------------------------------------------------
# 4. vague or wrong messages
# ------------------------------------------------------------------------------------------
def test_a_utf8_byte_order_mark_is_accepted(tmp_path, capsys):
    code, out, _ = _check(tmp_path, capsys, b"\xef\xbb\xbf" + b'title = "bom"\n'
                          + NORMAL_DESIGN.encode())
    assert code == 0 and "bom" in out


def test_a_utf16_file_is_named_as_such(tmp_path, capsys):
    code, _, err = _check(tmp_path, capsys, ('title = "x"\n' + NORMAL_DESIGN).encode("utf-16"))
    assert code == 2
    assert "saved as UTF-16 text" in err and "save it as UTF-8" in err


BINARY = """\
[endpoint]
type = "binary"
{rate}
scale = "{scale}"
[effect]
{effect}
[design_prior]
family = "normal"
mean = {mean}
sd = 0.05
"""


@pytest.mark.parametrize(("rate", "scale", "effect", "mean", "words"), [
    ("control_rate = 0.8", "difference", "assumed = 0.3", 0.1,
     ["'effect.assumed' = 0.3 gives a treatment response rate of 1.1 (0.8 + 0.3)",
      "between -0.8 and 0.2 at 'endpoint.control_rate' = 0.8"]),
    ("control_rate = 0.8", "difference", "assumed = 0.1\nalso_power_at = [0.1, 0.25]", 0.1,
     ["'effect.also_power_at[1]' = 0.25 gives a treatment response rate of 1.05"]),
    ("control_rate = 0.8", "difference", "assumed = 0.1\nrelevant = 0.21", 0.1,
     ["'effect.relevant' = 0.21 gives a treatment response rate of 1.01"]),
    ("control_rate = 0.3", "difference", "assumed = -0.4", -0.1,
     ["'effect.assumed' = -0.4 gives a treatment response rate of -0.1"]),
    ("reference_rate = 0.6", "difference", "assumed = 0.5", 0.1,
     ["'effect.assumed' = 0.5", "'endpoint.reference_rate' = 0.6"]),
    ("control_rate = 0.5", "risk_ratio", "assumed = 2.5", 0.1,
     ["'effect.assumed' = 2.5 gives a treatment response rate of 1.25 (0.5 x 2.5)",
      "at most 2 at 'endpoint.control_rate' = 0.5"]),
])
def test_binary_effects_giving_impossible_rates_name_their_keys(
        tmp_path, capsys, rate, scale, effect, mean, words):
    text = BINARY.format(rate=rate, scale=scale, effect=effect, mean=mean)
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    for word in words:
        assert word in err, (word, err)
    assert "design.toml" in err  # the file is named


def test_binary_effects_at_the_edge_and_odds_ratios_pass(tmp_path, capsys):
    text = BINARY.format(rate="control_rate = 0.8", scale="difference",
                         effect="assumed = 0.1\nalso_power_at = [0.2, -0.8]", mean=0.1)
    assert _check(tmp_path, capsys, text)[0] == 0
    text = BINARY.format(rate="control_rate = 0.8", scale="odds_ratio",
                         effect="assumed = 9.0", mean=0.5)
    assert _check(tmp_path, capsys, text)[0] == 0


def test_unreachable_zone_values_for_one_arm_name_their_keys(tmp_path, capsys):
    text = BINARY.format(rate="reference_rate = 0.6", scale="difference",
                         effect="assumed = 0.1", mean=0.1)
    text += "[zones]\nmin_acceptable = 0.05\ntarget = 0.5\n"
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert "'zones.target' = 0.5 cannot be reached" in err
    assert "min_acceptable" not in err.split("cannot be reached")[0].split("\n")[-1]


@pytest.mark.parametrize(("table", "absent", "present"), [
    # a short key is suggested only for a close spelling: 'df' is not 'sd'
    ('family = "normal"\nmean = 4.0\ndf = 3.0',
     "Did you mean 'sd'", ["unknown key 'df' in [design_prior]",
                           "'df' belongs to family = \"student_t\"",
                           "Known keys: family, mean, sd."]),
    ('family = "normal"\nmean = 4.0\nsd = 2.0\nse = 1.0',
     "Did you mean", ["unknown key 'se' in [design_prior]", "family = \"earlier_trial\""]),
    ('family = "student_t"\ndf = 3.0\nscale = 2.0\nshape = 1.0',
     "Did you mean 'scale'", ["unknown key 'shape' in [design_prior]"]),
    ('family = "student_t"\ndf = 3.0\nloc = 4.0', "belongs to",
     ["unknown key 'loc' in [design_prior]. Did you mean 'location'?"]),
    ('family = "normal"\nmena = 4.0\nsd = 2.0', "belongs to", ["Did you mean 'mean'?"]),
])
def test_suggestions_only_for_close_spellings(tmp_path, capsys, table, absent, present):
    text = NORMAL_DESIGN.replace('family = "normal"\nmean = 4.0\nsd = 2.0', table)
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert absent not in err
    for word in present:
        assert word in err, (word, err)


def test_a_mixture_weight_is_reported_where_it_was_written(tmp_path, capsys):
    mixture = textwrap.dedent("""\
        family = "mixture"
        weight = [0.5, 0.5]
        parts = [{ family = "normal", mean = 4.0, sd = 2.0, weight = 1.5 },
                 { family = "point_mass", value = 0.0, weight = 0.5 }]""")
    text = NORMAL_DESIGN.replace('family = "normal"\nmean = 4.0\nsd = 2.0', mixture)
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert "unknown key 'weight' in [design_prior]. Each part carries its own 'weight'" in err
    assert "'design_prior.parts[0].weight' must be a number > 0 and <= 1. Got 1.5." in err
    assert "'design_prior.weights'" not in err


@pytest.mark.parametrize("value", [0, 1.5])
def test_power_weight_states_the_range_it_checks(tmp_path, capsys, value):
    earlier = f'family = "earlier_trial"\nestimate = 4.0\nse = 1.0\npower_weight = {value}'
    text = NORMAL_DESIGN.replace('family = "normal"\nmean = 4.0\nsd = 2.0', earlier)
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert f"'design_prior.power_weight' must be a number > 0 and <= 1. Got {value}." in err


def test_power_weight_in_its_range_is_accepted(tmp_path, capsys):
    earlier = 'family = "earlier_trial"\nestimate = 4.0\nse = 1.0\npower_weight = 0.01'
    text = NORMAL_DESIGN.replace('family = "normal"\nmean = 4.0\nsd = 2.0', earlier)
    assert _check(tmp_path, capsys, text)[0] == 0


# ------------------------------------------------------------------------------------------
# 6. not a design file at all
# ------------------------------------------------------------------------------------------
def test_a_folder_is_named_as_a_folder(tmp_path, capsys):
    folder = tmp_path / "designs"
    folder.mkdir()
    code = main(["check", str(folder)])
    err = capsys.readouterr().err
    assert code == 2
    assert "is a folder, not a file" in err and "designs" in err
    assert "Traceback" not in err


def test_bytes_that_are_not_utf8_are_located(tmp_path, capsys):
    code, _, err = _check(tmp_path, capsys, b'title = "caf\xe9"\n' + NORMAL_DESIGN.encode())
    assert code == 2
    assert "is not a UTF-8 text file: byte 13 (line 1) is 0xe9" in err


@pytest.mark.parametrize("text", ["", "\n\n", "# only a comment\n"])
def test_an_empty_file_says_it_is_empty(tmp_path, capsys, text):
    code, _, err = _check(tmp_path, capsys, text)
    assert code == 2
    assert "has no keys or tables (it is empty, or holds only comments)" in err
    assert "[endpoint]" in err and "[design_prior]" in err


def test_a_file_with_only_a_title_names_the_missing_tables(tmp_path, capsys):
    code, _, err = _check(tmp_path, capsys, 'title = "Only a title"\n')
    assert code == 2
    assert "2 problems" in err
    assert "the [endpoint] table is missing" in err
    assert "the [design_prior] table is missing" in err


def test_the_real_process_prints_no_raw_escape(tmp_path):
    path = tmp_path / "esc.toml"
    path.write_text('title = "\\u001b[2J\\u001b[31mgotcha"\n' + NORMAL_DESIGN)
    proc = subprocess.run([sys.executable, "-m", "assurance.cli", "check", str(path)],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert "\x1b" not in proc.stderr and "\x1b" not in proc.stdout
    assert "Traceback" not in proc.stderr
    assert "'title'" in proc.stderr and "'\\x1b'" in proc.stderr
