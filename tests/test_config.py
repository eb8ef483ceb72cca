"""Settings validation (service/config.py): refused values, unknown variables, the exit path."""

from __future__ import annotations

import io

import pytest

from service.config import SETTINGS, ConfigError, Settings, load_or_exit, unknown_variables, unknown_variables_warning

# Settings whose parser takes any text (a list, a path) have no value to refuse.
_FREE_TEXT = {"api_keys", "api_keys_file", "cors_origins", "metrics_dir"}


@pytest.mark.parametrize("setting", [s for s in SETTINGS if s.name not in _FREE_TEXT], ids=lambda s: s.env)
def test_every_checked_setting_refuses_garbage_naming_variable_value_and_what_is_allowed(setting):
    with pytest.raises(ConfigError) as err:
        Settings.from_env({setting.env: "not valid!"})
    message = str(err.value)
    assert err.value.variable == setting.env and setting.env in message
    assert "'not valid!'" in message
    assert err.value.allowed and err.value.allowed in message and "\n" not in message


@pytest.mark.parametrize("env, value, allowed", [
    ("ROLLOFF_WORKERS", "abc", "a whole number from 1 up"),
    ("ROLLOFF_WORKERS", "0", "a whole number from 1 up"),
    ("ROLLOFF_WORKERS", "2.5", "a whole number from 1 up"),
    ("ROLLOFF_WORKERS", "1_000", "a whole number from 1 up"),
    ("ROLLOFF_PORT", "70000", "a TCP port, a whole number from 1 to 65535"),
    ("ROLLOFF_MAX_REQUESTS", "-1", "a whole number from 0 up"),
    ("ROLLOFF_LOG_LEVEL", "loud", "one of debug, info, warning, error, critical"),
    ("ROLLOFF_HOST", "", "a host name or IP address"),
])
def test_refused_values(env, value, allowed):
    with pytest.raises(ConfigError) as err:
        Settings.from_env({env: value})
    assert str(err.value) == f"{env}={value!r} is not valid: expected {allowed}"


def test_accepted_edge_values():
    s = Settings.from_env({"ROLLOFF_MAX_REQUESTS": "0", "ROLLOFF_PORT": "65535", "ROLLOFF_LOG_LEVEL": "WARNING",
                           "ROLLOFF_WORKERS": " 3 "})
    assert (s.max_requests, s.port, s.log_level, s.workers) == (0, 65535, "warning", 3)


def test_config_error_is_a_value_error():
    assert issubclass(ConfigError, ValueError)


def test_unknown_variables_listed_with_the_closest_setting():
    env = {"ROLLOFF_WORKER": "3", "ROLLOFF_COLOUR": "blue", "ROLLOFF_PORT": "8000", "OTHER_THING": "1"}
    assert unknown_variables(env) == ["ROLLOFF_COLOUR", "ROLLOFF_WORKER"]
    assert unknown_variables_warning(env) == (
        "rolloff: warning: unknown settings ignored: ROLLOFF_COLOUR, ROLLOFF_WORKER (did you mean ROLLOFF_WORKERS?)")
    assert unknown_variables_warning({"ROLLOFF_PORT": "1"}) is None


def test_load_or_exit_writes_one_line_and_exits_2():
    out = io.StringIO()
    with pytest.raises(SystemExit) as stop:
        load_or_exit({"ROLLOFF_WORKERS": "abc"}, stream=out)
    assert stop.value.code == 2
    assert out.getvalue() == ("rolloff: invalid configuration: ROLLOFF_WORKERS='abc' is not valid: "
                              "expected a whole number from 1 up\n")


def test_load_or_exit_warns_once_about_unknown_variables():
    out = io.StringIO()
    settings = load_or_exit({"ROLLOFF_WORKERS": "3", "ROLLOFF_TREADS": "4"}, stream=out)
    assert settings.workers == 3
    assert out.getvalue().splitlines() == [
        "rolloff: warning: unknown settings ignored: ROLLOFF_TREADS (did you mean ROLLOFF_THREADS?)"]
    quiet = io.StringIO()
    load_or_exit({"ROLLOFF_TREADS": "4"}, stream=quiet, warn=False)
    assert quiet.getvalue() == ""
