"""Start the app server with the engine already loaded (used by ``duality app``).

``python app/serve.py [streamlit options] -- [app options]`` imports the page's modules
(sympy, the engine, plotly) and derives the opening scenario's dual functions *before*
the server starts, then hands over to Streamlit's own command line (``streamlit run``)
in this same process.  The page script finds everything in place, so the first visitor
does not wait for imports or for the first derivation.
"""
import os
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def warm(scenario: str | None) -> None:
    """Import the page's modules and derive the opening scenario (fills the caches)."""
    # deferred: loading the engine is this function's job, timed by the launcher; the
    # imports need the project root that this module puts on sys.path first
    from app import analysis, views  # noqa: F401 - imported for the page script
    from app import workspace
    from duality.apply import scenario as sc
    from duality.errors import DualityError

    path = Path(scenario) if scenario else workspace.SCENARIO_DIR / workspace.DEFAULT_SCENARIO
    try:
        s = sc.load(path)
        model = s.build_model()
        analysis.cards(model, s.points()[0])
        analysis.model_latex(model)
        analysis.broken_restrictions(model)   # the restriction warning of every view
    except DualityError:
        pass  # the page shows the problem to the visitor


def main(argv: list[str]) -> int:
    app_args = argv[argv.index("--") + 1:] if "--" in argv else []
    scenario = None
    if "--scenario" in app_args:
        scenario = app_args[app_args.index("--scenario") + 1]
    warm(scenario or os.environ.get("DUALITY_APP_SCENARIO"))
    from streamlit.web import cli as streamlit_cli  # deferred: after the engine is warm


    sys.argv = ["streamlit", "run", str(ROOT / "app" / "main.py"), *argv]
    return streamlit_cli.main()


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
