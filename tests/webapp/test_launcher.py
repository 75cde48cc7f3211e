"""``duality app``: the command line that starts the server, and its one-line errors."""
import sys

from click.testing import CliRunner

from duality.cli import app_command, main


def test_app_command_serves_on_loopback_with_the_apps_look(tmp_path):
    scen = tmp_path / "s.toml"
    scen.write_text("x")
    cmd = app_command(str(scen), 8600, str(tmp_path))
    assert cmd[0] == sys.executable and cmd[1].endswith("app/serve.py")
    assert cmd[cmd.index("--server.address") + 1] == "127.0.0.1"
    assert cmd[cmd.index("--server.port") + 1] == "8600"
    assert "--theme.primaryColor=#17877b" in cmd
    tail = cmd[cmd.index("--") + 1:]
    assert tail == ["--scenario", str(scen.resolve()), "--save-dir", str(tmp_path.resolve())]


def test_app_command_without_options_opens_the_default():
    assert "--" not in app_command(None, 8501, None)


def test_bad_app_options_give_one_line_and_exit_code_2(tmp_path):
    r = CliRunner().invoke(main, ["app", str(tmp_path / "missing.toml")])
    assert r.exit_code == 2 and "no scenario file" in r.output
    assert "Traceback" not in r.output
    r = CliRunner().invoke(main, ["app", "--save-dir", str(tmp_path / "nowhere")])
    assert r.exit_code == 2 and "no folder" in r.output


def test_warm_up_fills_the_derivation_cache():
    from app import analysis, serve, workspace
    import duality as dy

    serve.warm(None)
    s = dy.load_scenario(workspace.SCENARIO_DIR / workspace.DEFAULT_SCENARIO)
    before = analysis.derive_all.cache_info().hits
    analysis.derive_all(s.build_model())
    assert analysis.derive_all.cache_info().hits == before + 1
