"""``geo-reach demo``: the whole study on the invented region, into maps/demo/."""

from __future__ import annotations

from pathlib import Path

__all__ = ["register", "repo_root", "run"]


def register(sub):
    p = sub.add_parser("demo", help="run the whole analysis on the invented demo region",
                       description="Run data_samples/study.toml (an invented region) with its proposed line "
                                   "as a scenario, into maps/demo/ (the same rules as geo-reach run).")
    p.add_argument("-o", "--output", default=None, metavar="OUTDIR", help="output folder (default maps/demo)")
    p.add_argument("--overwrite", action="store_true",
                   help="replace a folder that holds results geo-reach wrote (never one holding other files)")
    p.add_argument("--quiet", action="store_true", help="no progress lines")
    p.set_defaults(func=run)


def repo_root() -> Path:
    return Path(__file__).resolve().parents[2]


def run(args):
    from ..errors import MissingInputError
    from ..pipeline import run_study
    from ..study import load_study
    from .run import print_summary

    root = repo_root()
    study_path = root / "data_samples" / "study.toml"
    if not study_path.exists():
        raise MissingInputError(f"file '{study_path}': the demo study is missing; run geo-reach demo from a "
                                "checkout of the repository")
    out = Path(args.output) if args.output else root / "maps" / "demo"
    from ._progress import StepDisplay

    study = load_study(study_path)
    show = StepDisplay(not args.quiet, total=6 + 5 * len(study.scenarios))
    summary = run_study(study, out, overwrite=args.overwrite, progress=show)
    show.close()
    print_summary(summary, out)
    return 0
