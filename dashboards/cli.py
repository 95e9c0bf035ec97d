"""The ``levelwise`` command.

Commands::

    levelwise serve [STUDY] [--port N] [--ip ADDR] [--token T]   the workbench on a study (default: the demo)
    levelwise publish STUDY --out DIR                           write a read-only dashboard folder
    levelwise view DIR [--port N] [--ip ADDR] [--token T] [--idle-timeout S] [--pool-size N]
                   [--max-kernels N] [--max-kernels-per-client N]    serve a published folder (port 8866)
    levelwise export-html STUDY -o FILE.html                     write the offline single-file export
    levelwise import TABLE -o STUDY.json [--factor COL ...] [--response COL ...] [--run COL]
                   [--achieved FACTOR=COL ...] [--plan DESIGN.csv] [--title T]   a CSV/XLSX becomes a study file
                   [--binomial RESPONSE=TRIALS ...] [--poisson RESPONSE[=EXPOSURE] ...] [--link RESPONSE=LINK]

STUDY is a study JSON file or the word ``demo`` (the invented demo study).

Exit codes: 0 success; 1 the command failed (the message says why); 2 bad usage (argparse's code).
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from . import NOTEBOOKS
from .hardening import CULL_IDLE_TIMEOUT, PER_CLIENT

DEFAULT_PORT = 8866
EXIT_OK, EXIT_FAILURE, EXIT_USAGE = 0, 1, 2
EPILOG = "Exit codes: 0 success, 1 failure (the message says why), 2 bad usage."


def voila_command(notebook, port: int, ip: str = "127.0.0.1", **options) -> list[str]:
    """The hardened standalone voila command line (see :mod:`levelwise.dashboards.hardening`)."""
    from .hardening import voila_command as hardened

    return hardened(notebook, port=port, ip=ip, **options)


def _run_server(notebook, args, *, study_env: str | None, what: str, preheat: bool, config_dir=None) -> int:
    from .hardening import CULL_INTERVAL, server_env
    from .study_source import STUDY_ENV

    idle = getattr(args, "idle_timeout", CULL_IDLE_TIMEOUT)
    command = voila_command(
        notebook, args.port, args.ip, token=args.token, preheat=preheat, pool_size=getattr(args, "pool_size", 1),
        config_dir=config_dir, cull_idle_timeout=idle, cull_interval=max(1, min(CULL_INTERVAL, idle // 2)),
        max_kernels=getattr(args, "max_kernels", 0), max_kernels_per_client=getattr(args, "per_client", PER_CLIENT),
        base_url=getattr(args, "base_url", "/"),
    )
    env = server_env({STUDY_ENV: study_env} if study_env else None)
    query = f"?token={args.token}" if args.token else ""
    prefix = "/" + getattr(args, "base_url", "/").strip("/") + "/" if getattr(args, "base_url", "/").strip("/") else "/"
    print(f"levelwise: serving {what} at http://{args.ip}:{args.port}{prefix}{query} (Ctrl-C to stop)", flush=True)
    # Become the voila server (exec): Ctrl-C and SIGTERM reach it directly, and no orphan is left behind.
    os.chdir(Path(notebook).parent)
    os.execve(command[0], command, env)
    return EXIT_FAILURE  # pragma: no cover - execve does not return


def serve(args) -> int:
    """Serve the explore workbench on STUDY (default: the invented demo)."""
    study = args.study
    if study != "demo":
        path = Path(study)
        if not path.is_file():
            print(f"levelwise serve: the study file {study!r} does not exist. Give a study JSON file or 'demo'.",
                  file=sys.stderr)
            return EXIT_FAILURE
        study = str(path.resolve())
    return _run_server(NOTEBOOKS / "explore.ipynb", args, study_env=study, what="the workbench", preheat=False)


def publish(args) -> int:
    from levelwise import LevelwiseError

    from .publish import publish as write_folder

    try:
        out = write_folder(args.study, args.out)
    except (LevelwiseError, OSError) as exc:
        print(f"levelwise publish: {exc}", file=sys.stderr)
        return EXIT_FAILURE
    print(f"levelwise: published {args.study} to {out}/ (run it with: levelwise view {out})")
    return EXIT_OK


def view(args) -> int:
    """Serve a published folder, read-only and hardened."""
    from .publish import PUBLISHED_FILES
    from .study_source import STUDY_FILE

    folder = Path(args.dir).resolve()
    missing = [name for name in PUBLISHED_FILES if not (folder / name).is_file()]
    if missing:
        print(f"levelwise view: {str(folder)!r} is not a published folder: it lacks {', '.join(missing)}. "
              "Write one with 'levelwise publish STUDY --out DIR'.", file=sys.stderr)
        return EXIT_FAILURE
    return _run_server(folder / "present.ipynb", args, study_env=str(folder / STUDY_FILE),
                       what="the read-only dashboard", preheat=args.pool_size > 0, config_dir=folder)


def export_html(args) -> int:
    from levelwise import LevelwiseError

    from .export_html import write_export

    try:
        path = write_export(args.study, args.output)
    except (LevelwiseError, OSError) as exc:
        print(f"levelwise export-html: {exc}", file=sys.stderr)
        return EXIT_FAILURE
    size = path.stat().st_size
    print(f"levelwise: wrote {path} ({size / 1024:.0f} KB); open it in any browser, no network needed")
    return EXIT_OK


def import_study(args) -> int:
    """Turn a finished CSV/XLSX table into a study file, through the one import validator."""
    import warnings

    from levelwise import LevelwiseError, Study, read_table
    from levelwise.study import guess_columns

    out = Path(args.output)
    if out.exists() and not args.force:
        print(f"levelwise import: {str(out)!r} exists; pass --force to replace it.", file=sys.stderr)
        return EXIT_FAILURE
    try:
        achieved = {}
        for item in args.achieved or ():
            factor, sep, column = item.partition("=")
            if not sep or not factor or not column:
                print(f"levelwise import: --achieved takes FACTOR=COLUMN; got {item!r}.", file=sys.stderr)
                return EXIT_USAGE
            achieved[factor] = column
        counts = {}
        for option, family in (("binomial", "binomial"), ("poisson", "poisson")):
            for item in getattr(args, option) or ():
                name, sep, partner = item.partition("=")
                if not name or (family == "binomial" and (not sep or not partner)):
                    print(f"levelwise import: --binomial takes RESPONSE=TRIALS_COLUMN; got {item!r}."
                          if family == "binomial" else f"levelwise import: --poisson takes RESPONSE or "
                          f"RESPONSE=EXPOSURE_COLUMN; got {item!r}.", file=sys.stderr)
                    return EXIT_USAGE
                counts[name] = {"family": family, **({"trials" if family == "binomial" else "exposure": partner}
                                                     if partner else {})}
        for item in args.link or ():
            name, sep, link = item.partition("=")
            if not sep or name not in counts:
                print(f"levelwise import: --link takes RESPONSE=LINK for a response given with --binomial or "
                      f"--poisson {sorted(counts)}; got {item!r}.", file=sys.stderr)
                return EXIT_USAGE
            counts[name]["link"] = link
        factors, responses = args.factor, args.response
        if not factors or not responses:
            guess = guess_columns(read_table(args.table, sheet=args.sheet, delimiter=args.delimiter))
            factors = factors or guess["factors"]
            responses = responses or [c for c in guess["responses"] if c not in counts]
            achieved = achieved or guess["achieved"]
            print(f"levelwise import: guessed factors {factors}, responses {responses}"
                  + (f", achieved {achieved}" if achieved else "") + " (name them with --factor/--response)")
        responses = list(responses) + [name for name in counts if name not in responses]
        plan = None
        if args.plan:
            plan = read_table(args.plan)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # the report below lists every warning
            study = Study.from_table(args.table, factors=factors, responses=responses, run=args.run,
                                     achieved=achieved, plan=plan, title=args.title, sheet=args.sheet,
                                     delimiter=args.delimiter, decimal=args.decimal, counts=counts or None)
        study.save(out)
    except (LevelwiseError, OSError) as exc:
        print(f"levelwise import: {exc}", file=sys.stderr)
        return EXIT_FAILURE
    report = study.import_report
    for warning in report.warnings:
        print(f"  {warning}")
    print(f"levelwise: wrote {out} ({len(study.run_ids)} runs, {report.values_recorded} values, factors "
          f"{study.factor_names}, responses {list(study.responses)}); open it with: levelwise serve {out}")
    return EXIT_OK


def _port(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number from 1 to 65535, got {text!r}") from None
    if not 1 <= value <= 65535:
        raise argparse.ArgumentTypeError(f"must be a whole number from 1 to 65535, got {text!r}")
    return value


def _seconds(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number of seconds, at least 2; got {text!r}") from None
    if value < 2:
        raise argparse.ArgumentTypeError(f"must be a whole number of seconds, at least 2; got {text!r}")
    return value


def _count(least: int):
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            value = least - 1
        if value < least:
            raise argparse.ArgumentTypeError(f"must be a whole number, at least {least}; got {text!r}")
        return value

    return parse


def _server_options(parser) -> None:
    parser.add_argument("--port", type=_port, default=DEFAULT_PORT, help=f"Port (default {DEFAULT_PORT}).")
    parser.add_argument("--ip", default="127.0.0.1",
                        help="Address to bind (default 127.0.0.1: this machine only; 0.0.0.0 for every interface).")
    parser.add_argument("--base-url", default="/", dest="base_url",
                        help="Path prefix the server answers under, behind a proxy (e.g. /services/NAME/; default /).")
    parser.add_argument("--token", default=None,
                        help="Require this token (?token=... in the URL). Default: no token, which is safe on "
                             "127.0.0.1 only.")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="levelwise",
        description="Plan, fit and explore designed experiments; serve and publish the results as dashboards.",
        epilog=EPILOG,
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    p_serve = sub.add_parser("serve", help="Serve the explore workbench on a study (default: the demo).",
                             description="Serve the explore workbench with the standalone voila server.",
                             epilog=EPILOG)
    p_serve.add_argument("study", nargs="?", default="demo", metavar="STUDY",
                         help="A study JSON file, or 'demo' (the invented demo study; the default).")
    _server_options(p_serve)
    p_serve.add_argument("--max-kernels-per-client", type=_count(1), default=PER_CLIENT, dest="per_client",
                         help=f"Workbench kernels one client address may hold at once (default {PER_CLIENT}; each "
                              "open tab holds one until it is closed or idle).")
    p_serve.set_defaults(handler=serve)

    p_pub = sub.add_parser("publish", help="Write a self-contained read-only dashboard folder.",
                           description="Write DIR with the read-only notebook, the study file, a hardened voila "
                                       "configuration and a README. DIR must not exist yet or be empty.",
                           epilog=EPILOG)
    p_pub.add_argument("study", metavar="STUDY", help="A study JSON file, or 'demo'.")
    p_pub.add_argument("--out", required=True, metavar="DIR", help="The folder to write.")
    p_pub.set_defaults(handler=publish)

    p_view = sub.add_parser("view", help="Serve a published folder, read-only (default port 8866).",
                            description="Serve a folder written by 'levelwise publish' with every hardened "
                                        "setting.", epilog=EPILOG)
    p_view.add_argument("dir", metavar="DIR", help="A folder written by 'levelwise publish'.")
    _server_options(p_view)
    p_view.add_argument("--pool-size", type=int, default=1, dest="pool_size",
                        help="Preheated kernels kept ready for new viewers (default 1; 0 turns preheating off).")
    p_view.add_argument("--idle-timeout", type=_seconds, default=CULL_IDLE_TIMEOUT, dest="idle_timeout",
                        help=f"Shut a viewer's kernel down after this many idle seconds (default {CULL_IDLE_TIMEOUT}).")
    p_view.add_argument("--max-kernels", type=_count(0), default=0, dest="max_kernels",
                        help="Viewers' kernels alive at once; past it a new viewer gets a 'busy, try again' page "
                             "(default 0: sized to this machine's memory, about 250 MB per kernel).")
    p_view.add_argument("--max-kernels-per-client", type=_count(1), default=PER_CLIENT, dest="per_client",
                        help=f"Viewers' kernels one client address may hold at once (default {PER_CLIENT}).")
    p_view.set_defaults(handler=view)

    p_exp = sub.add_parser("export-html", help="Write the offline single-file HTML export.",
                           description="Write one HTML file that opens from disk with no network and no Python, "
                                       "and still computes predictions when a slider moves.", epilog=EPILOG)
    p_exp.add_argument("study", metavar="STUDY", help="A study JSON file, or 'demo'.")
    p_exp.add_argument("-o", "--output", required=True, metavar="FILE.html", help="The HTML file to write.")
    p_exp.set_defaults(handler=export_html)

    p_imp = sub.add_parser("import", help="Turn a CSV/XLSX table of finished runs into a study file.",
                           description="Read TABLE (one row per run) and write a study file. Without --factor/"
                                       "--response the columns are guessed (few distinct settings: a factor; "
                                       "other numbers: a response) and the guess is printed. Every problem is "
                                       "reported by row and column and nothing is written; every column not "
                                       "used is listed.", epilog=EPILOG)
    p_imp.add_argument("table", metavar="TABLE", help="A .csv or .xlsx file, header in the first row.")
    p_imp.add_argument("-o", "--output", required=True, metavar="STUDY.json", help="The study file to write.")
    p_imp.add_argument("--factor", action="append", metavar="COL", help="A factor column (repeat for each).")
    p_imp.add_argument("--response", action="append", metavar="COL", help="A response column (repeat for each).")
    p_imp.add_argument("--run", metavar="COL", default=None, help="The run-id column (default: one headed 'run').")
    p_imp.add_argument("--achieved", action="append", metavar="FACTOR=COL",
                       help="A column holding the setting actually reached for FACTOR.")
    p_imp.add_argument("--plan", metavar="DESIGN", default=None,
                       help="The planned design (CSV/XLSX with the factor columns, optionally 'run'): rows are "
                            "matched to it by run id or by settings, in any order.")
    p_imp.add_argument("--binomial", action="append", metavar="RESPONSE=TRIALS",
                       help="RESPONSE counts passes out of the trials in column TRIALS (a logit fit).")
    p_imp.add_argument("--poisson", action="append", metavar="RESPONSE[=EXPOSURE]",
                       help="RESPONSE is a count (a log-rate fit), per unit of column EXPOSURE when given.")
    p_imp.add_argument("--link", action="append", metavar="RESPONSE=LINK",
                       help="The link of a count response: logit or probit (binomial), log (Poisson).")
    p_imp.add_argument("--title", default="", help="The study title.")
    p_imp.add_argument("--sheet", default=None, help="The worksheet of an XLSX file (default: the first).")
    p_imp.add_argument("--delimiter", default=",", help="The CSV field separator (default ',').")
    p_imp.add_argument("--decimal", default=".", help="The decimal mark of numbers written as text (default '.').")
    p_imp.add_argument("--force", action="store_true", help="Replace STUDY.json if it exists.")
    p_imp.set_defaults(handler=import_study)
    return parser


def main(argv=None) -> int:
    args = build_parser().parse_args(argv)  # exits with 2 on bad usage
    return args.handler(args)


if __name__ == "__main__":
    sys.exit(main())
