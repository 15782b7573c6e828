"""Command line: parse, call the pipeline, map outcomes to exit status.

Exit status: 0 done (``check``: every link passes, no error finding), 1 (``check``
only) some link fails or is incomplete or an audit finding is an error, 2 bad input
or any other error — with the message on standard error and nothing written.
"""
from __future__ import annotations

import logging
import sys
import traceback
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import click
from rich.console import Console

from reportgen import __version__
from reportgen.errors import InputError, ReportgenError
from reportgen.model import ReportLanguage

MAX_PROBLEMS_SHOWN = 50

EPILOG = """\b
Examples:
  reportgen check demo_project            judge every result, print a table
  reportgen build demo_project -o out/    write report.html, report.pdf,
                                          results.csv and summary.json
  reportgen limits                        list the built-in limit sets
  reportgen limits tia-568.3-d            show one limit set with its sources
  reportgen applications                  list the application table
  reportgen verify out/report.pdf         check a report: files inside, digest,
                                          verdicts judged again
  reportgen import demo_project           show what imports: entries read

Exit status: 0 done, 1 (check) a link fails or is incomplete or an audit
finding is an error, 2 bad input or any other error (nothing is written).

-v and --debug go before or after the command.
"""


class _Failure(Exception):
    """Carries an exit status out of a command."""

    def __init__(self, status: int) -> None:
        self.status = status


def _stderr() -> Console:
    return Console(stderr=True, highlight=False, soft_wrap=True)


def _stdout() -> Console:
    return Console(highlight=False)


@dataclass
class _Settings:
    """What -v and --debug asked for, wherever on the command line they were given."""

    verbose: bool = False
    debug: bool = False


def _configure_logging(settings: _Settings) -> None:
    """-v: our steps (INFO of the ``reportgen`` loggers); --debug: every log line.

    Other libraries' loggers (WeasyPrint, fontTools, ...) inherit the root level, which
    stays at WARNING unless --debug, so -v shows our lines only.
    """
    logging.basicConfig(level=logging.DEBUG if settings.debug else logging.WARNING,
                        format="%(message)s", stream=sys.stderr, force=True)
    ours = logging.DEBUG if settings.debug else logging.INFO if settings.verbose else logging.NOTSET
    logging.getLogger("reportgen").setLevel(ours)


def _set_flag(ctx: click.Context, param: click.Parameter, value: bool) -> None:
    if value and param.name is not None:
        settings = ctx.ensure_object(_Settings)
        setattr(settings, param.name, True)
        _configure_logging(settings)


def _flag_options() -> list[click.Option]:
    """-v and --debug, accepted by the group and by every command (before or after it)."""
    return [
        click.Option(["-v", "--verbose"], is_flag=True, expose_value=False, callback=_set_flag,
                     help="Show each step of the run."),
        click.Option(["--debug"], is_flag=True, expose_value=False, callback=_set_flag,
                     help="Show tracebacks (internal errors, failing PDF workers) and the "
                          "libraries' log lines too."),
    ]


class _Command(click.Command):
    """A command that takes -v/--debug and lists its whole first paragraph in --help."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.params.extend(_flag_options())

    def get_short_help_str(self, limit: int = 45) -> str:
        if self.short_help:
            return super().get_short_help_str(limit)
        return " ".join((self.help or "").split("\n\n")[0].split())


class _Group(click.Group):
    command_class = _Command


@click.group(cls=_Group, epilog=EPILOG, params=_flag_options(),
             context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="reportgen", message="%(prog)s %(version)s")
@click.pass_context
def cli(ctx: click.Context) -> None:
    """Judge fiber-optic link test results against a loss budget and publish a report."""
    _configure_logging(ctx.ensure_object(_Settings))


SIGN_PASSWORD_VARIABLE = "REPORTGEN_SIGN_PASSWORD"


def _signing_key(path: Path) -> Any:
    """Load the PKCS#12 file: password from the environment, else none, else asked for.

    The password is never a command-line argument (it would show in process lists and
    shell history).
    """
    import os

    from reportgen.pdf.sign import load_signing_key

    try:
        data = path.read_bytes()
    except OSError as error:
        raise ReportgenError(f"{path}: cannot read the signing key ({error.strerror})") from None
    password = os.environ.get(SIGN_PASSWORD_VARIABLE)
    if password is not None:
        return load_signing_key(data, password.encode("utf-8"), str(path))
    try:
        return load_signing_key(data, None, str(path))  # a file without a password
    except ReportgenError:
        if not sys.stdin.isatty():
            raise ReportgenError(
                f"{path}: the PKCS#12 file needs a password; set {SIGN_PASSWORD_VARIABLE} "
                "(no terminal to ask on)") from None
    asked = click.prompt(f"Password of {path}", hide_input=True, err=True)
    return load_signing_key(data, asked.encode("utf-8"), str(path))


PROJECT = click.argument("project", type=click.Path(path_type=Path))


@cli.command(epilog="Exit status: 0 every link passes and no audit finding is an error, "
                    "1 some link fails or is incomplete or an audit finding is an error, "
                    "2 bad input.")
@PROJECT
@click.option("--all", "show_all", is_flag=True,
              help="List every link and audit finding, also in large projects (default: above "
                   "100 links only the links that fail or are incomplete; above 100 findings "
                   "only the errors).")
def check(project: Path, show_all: bool) -> None:
    """Validate and judge PROJECT, print a table of links and the audit findings; write nothing."""
    from reportgen import pipeline
    from reportgen.report.terminal import print_check_table

    outcome = pipeline.compute(pipeline.validate_only(project))
    print_check_table(_stdout(), outcome, show_all=show_all)
    totals = outcome.judgement.totals
    if totals["fail"] or totals["incomplete"] or outcome.findings.has_errors:
        raise _Failure(1)


@cli.command(epilog="Outputs: report.html, report.pdf, results.csv, summary.json. "
                    "Set SOURCE_DATE_EPOCH for a reproducible report date.")
@PROJECT
@click.option("-o", "--output", type=click.Path(path_type=Path),
              help="Output folder (default: PROJECT/report).")
@click.option("--data-only", is_flag=True,
              help="Write only results.csv and summary.json (no HTML/PDF report).")
@click.option("-j", "--jobs", type=click.IntRange(min=1), default=None,
              help="Processes rendering the PDF's parts (default: the cores this process "
                   "may use).")
@click.option("--no-cache", is_flag=True,
              help="Render every part of the PDF again, ignoring the parts kept by earlier "
                   "builds in OUTPUT/.reportgen-cache.")
@click.option("--cluster", metavar="ADDRESS", envvar="REPORTGEN_CLUSTER", default=None,
              help="Render the PDF's parts on the Dask scheduler at ADDRESS, e.g. "
                   "tcp://10.0.0.5:8786 (also REPORTGEN_CLUSTER; needs reportgen[cluster]).")
@click.option("--sign", "sign_p12", type=click.Path(path_type=Path), metavar="KEY.p12",
              help="Sign report.pdf with the key and certificate of this PKCS#12 file; its "
                   f"password comes from {SIGN_PASSWORD_VARIABLE} or is asked for.")
@click.option("--language", type=click.Choice([code.value for code in ReportLanguage]),
              default=None,
              help="Language of report.html and report.pdf (default: report.language in "
                   "project.yaml, else en). Terminal output stays English.")
def build(project: Path, output: Path | None, data_only: bool, jobs: int | None,
          no_cache: bool, cluster: str | None, sign_p12: Path | None,
          language: str | None) -> None:
    """Validate, judge and write the report of PROJECT.

    A rebuild into the same output folder renders only the parts of the PDF that
    changed; the result is the same, byte for byte, as a build from scratch.
    """
    if not data_only and not cluster:
        from reportgen.pdf.forkserver import start_early

        start_early()  # the PDF workers' server loads WeasyPrint while this process imports
    from reportgen import pipeline
    from reportgen.report.terminal import progress_bar

    if sign_p12 is not None and data_only:
        raise click.UsageError("--sign signs report.pdf; --data-only writes none")
    sign_key = _signing_key(sign_p12) if sign_p12 is not None else None
    with progress_bar(_stderr(), enabled=not data_only) as progress:
        result = pipeline.build(project, output, report=not data_only, progress=progress,
                                jobs=jobs, cache=not no_cache, cluster=cluster or None,
                                sign_key=sign_key, language=language)
    totals = result.outcome.judgement.totals
    counts = result.outcome.findings.counts
    _stdout().print(
        f"{totals['links']} links: {totals['pass']} pass, {totals['fail']} fail, "
        f"{totals['incomplete']} incomplete; audit findings: {counts['error']} error, "
        f"{counts['warning']} warning, {counts['note']} note. Written to {result.out_dir}: "
        + ", ".join(result.files))


@cli.command(epilog="Exit status: 0 every check holds, 1 some check fails (named), 2 not a "
                    "PDF, not a report with its project inside, or a bad option.")
@click.argument("report_pdf", type=click.Path(path_type=Path))
@click.option("--project", "project_dir", type=click.Path(path_type=Path),
              help="Also compare this project folder's files with the copies in the report.")
@click.option("--trust", type=click.Path(path_type=Path), metavar="CERT.pem",
              help="Also check that the signature's certificate chains to this certificate.")
def verify(report_pdf: Path, project_dir: Path | None, trust: Path | None) -> None:
    """Check REPORT_PDF: signature, files inside, digest, verdicts judged again.

    Each check is printed with its outcome. The verdicts are checked by judging the
    embedded inputs again with this reportgen and comparing every loss, limit, margin
    and verdict with the embedded results.csv and summary.json.
    """
    from reportgen.verify import verify_report

    checks = verify_report(report_pdf, project_dir, trust)
    console = _stdout()
    for check in checks:
        console.print(f"{'ok  ' if check.ok else 'FAIL'}  {check.name}: {check.detail}",
                      markup=False, soft_wrap=True)
    failed = [check for check in checks if not check.ok]
    if failed:
        console.print(f"{len(failed)} of {len(checks)} checks failed: "
                      + ", ".join(check.name for check in failed), markup=False, soft_wrap=True)
        raise _Failure(1)
    console.print(f"all {len(checks)} checks hold", markup=False)


@cli.command("import", epilog="Exit status: 0 done, 2 bad input (every problem listed).")
@PROJECT
@click.option("--rows", default=5, show_default=True, type=click.IntRange(0, 1000),
              help="How many first rows to show per file.")
@click.option("--write", "write_dir", type=click.Path(path_type=Path),
              help="Also write the imported rows as links.csv and results/*.csv into this folder.")
def import_(project: Path, rows: int, write_dir: Path | None) -> None:
    """Show what the imports: entries of PROJECT read: per file the rows read, the mapping used,
    the columns left out and the first rows as judged."""
    from reportgen import pipeline
    from reportgen.report.terminal import print_imports

    if write_dir is not None:
        pipeline.check_out_dir(project, write_dir)
    outcome = pipeline.compute(pipeline.validate_only(project))
    if write_dir is not None:
        pipeline.check_out_dir_holds_no_input(outcome.project, write_dir)
    print_imports(_stdout(), outcome, rows=rows)
    if write_dir is not None:
        written = pipeline.write_imported(outcome.project, write_dir)
        _stdout().print(f"Written to {write_dir}: " + ", ".join(written), markup=False)


@cli.command()
@click.argument("set_id", required=False)
def limits(set_id: str | None) -> None:
    """List the built-in limit sets, or show SET_ID as a table with its sources."""
    from reportgen.report.terminal import print_limit_set, print_limit_sets

    if set_id is None:
        print_limit_sets(_stdout())
    else:
        print_limit_set(_stdout(), set_id)


@cli.command()
def applications() -> None:
    """List the application table (channel loss and length limits) with sources."""
    from reportgen.report.terminal import print_applications

    print_applications(_stdout())


from reportgen.cli_archive import register as _register_archive  # noqa: E402

_register_archive(cli, _flag_options)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status instead of exiting."""
    settings = _Settings()
    try:
        status = cli.main(args=list(argv) if argv is not None else None,
                          prog_name="reportgen", standalone_mode=False, obj=settings)
    except _Failure as failure:
        return failure.status
    except click.exceptions.Exit as done:
        return done.exit_code
    except click.ClickException as error:
        error.show()
        return error.exit_code
    except click.exceptions.Abort:
        _stderr().print("error: interrupted")
        return 2
    except InputError as error:
        console = _stderr()
        problems = error.problems
        for problem in problems[:MAX_PROBLEMS_SHOWN]:
            console.print(f"error: {problem}", markup=False)
        if len(problems) > MAX_PROBLEMS_SHOWN:
            console.print(f"error: ... and {len(problems) - MAX_PROBLEMS_SHOWN} more problems "
                          f"({len(problems)} in all); nothing was written", markup=False)
        else:
            console.print(f"{len(problems)} problem(s) found; nothing was written", markup=False)
        return 2
    except ReportgenError as error:
        hint = " (run with --debug for the traceback)" if error.__cause__ is not None else ""
        _report(error, f"error: {error}", hint, settings.debug)
        return 2
    except Exception as error:  # still exit 2 with a message, never a bare traceback
        _report(error, f"error: internal failure: {error!r}", " (run with --debug for details)",
                settings.debug)
        return 2
    return status if isinstance(status, int) else 0


def _report(error: BaseException, line: str, hint: str, debug: bool) -> None:
    """One line on standard error; with --debug the traceback (and its causes) before it."""
    if debug:
        sys.stderr.write("".join(traceback.format_exception(error)))
        hint = ""
    _stderr().print(line + hint, markup=False)


def run() -> int:
    """Console-script entry point."""
    return main()
