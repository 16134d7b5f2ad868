"""The ``topoaudit`` command: thin subcommands over the library's stages."""

from __future__ import annotations

import argparse
import shutil
import sys
from collections.abc import Sequence
from pathlib import Path

from topoaudit.errors import TopoauditError
from topoaudit.progress import PROGRESS_MODES, ProgressLine
from topoaudit.wording import plural

__all__ = ["main"]


def _check(args: argparse.Namespace) -> int:
    from reference_checks.runner import print_report, run_cases

    return print_report(run_cases(args.cases, neighbourhood=not args.stated_only))


def _progress(args: argparse.Namespace) -> ProgressLine:
    """The progress line asked for: ``--quiet`` is ``--progress quiet``."""
    return ProgressLine("quiet" if args.quiet else args.progress)


def _prefixed(say: ProgressLine, prefix: str):
    """A progress hook that puts ``prefix: `` before each message."""

    def prefixed(message: str) -> None:
        say(f"{prefix}: {message}")

    return prefixed


def _write_bundle(audit, out: Path) -> None:
    """Write the bundle, its page and its checksums beside ``out``, then rename it into place.

    Killed part-way, only a hidden ``.<name>.partial-*`` folder is left, which the next
    write to the same place removes; ``out`` appears complete or not at all.
    """
    from topoaudit.report.archive import staging, write_checksums
    from topoaudit.report.page import render_bundle

    with staging(out, name="bundle") as stage:
        audit.write(stage.path)
        render_bundle(stage.path)
        write_checksums(stage.path)


def _summary(a) -> str:
    """One line on an Analysis: rows, headline metric, weak regions confirmed."""
    from topoaudit.audit.tasks import task_named

    key, label = task_named(a.task).headline
    return (
        f"{a.model} {a.release}: {plural(a.provenance.rows, 'row')}, "
        f"{label} {a.overall[key].value:.3f}, "
        f"{plural(len(a.weak_regions), 'weak region')} confirmed"
    )


def audit_command(
    config: str | Path,
    out: str | Path,
    release: str | None = None,
    previous: str | Path | None = None,
) -> str:
    """The ``topoaudit audit`` command line that writes this bundle, quoted for a POSIX
    shell (recorded in the bundle and printed on its page, it runs as printed)."""
    import shlex

    words = ["topoaudit", "audit", str(config), "--out", str(out)]
    words += ["--release", release] if release else []
    return shlex.join(words + (["--previous", str(previous)] if previous else []))


def _with_scheduler(config, scheduler: str | None):
    """``config`` with its ``[compute] scheduler`` replaced by ``--scheduler``, if given."""
    import dataclasses

    from topoaudit._validation import SCHEDULER_ADDRESS, is_scheduler_address

    if scheduler is None:
        return config
    if not is_scheduler_address(scheduler):
        msg = f"--scheduler must be {SCHEDULER_ADDRESS.describe()}; got {scheduler!r}."
        raise TopoauditError(msg)
    compute = dataclasses.replace(config.compute, scheduler=scheduler)
    return dataclasses.replace(config, compute=compute)


def _audit(args: argparse.Namespace) -> int:
    from topoaudit.audit.run import run_audit
    from topoaudit.config import load_config

    out = Path(args.out)
    if out.is_symlink():
        raise TopoauditError(f"{out}: the output folder is a symbolic link; give the real one.")
    if out.exists() and (not out.is_dir() or any(out.iterdir())):
        msg = f"{out}: the output folder exists and is not empty; choose a new folder."
        raise TopoauditError(msg)
    config = _with_scheduler(load_config(args.config), args.scheduler)
    # where it runs is no part of the bundle: the command recorded leaves --scheduler out
    command = audit_command(args.config, args.out, args.release, args.previous)
    with _progress(args) as say:
        audit = run_audit(
            config, release=args.release, progress=say, command=command, previous=args.previous
        )
        say("writing the bundle, its page and its charts")
        _write_bundle(audit, out)
    print(f"{_summary(audit.analysis)}; bundle written to {out}")
    return 0


def _init(args: argparse.Namespace) -> int:
    from topoaudit.starter import write_starter

    starter, _config = write_starter(args.data, args.out, id=args.id, target=args.target)
    print(f"guessed from {args.data} ({starter.rows:,} rows), task {starter.task}:")
    width = max(len(g.role) for g in starter.guesses)
    for g in starter.guesses:
        column = g.column if g.role in ("features", "on_missing") else repr(g.column)
        print(f"  {g.role:<{width}}  {column}: {g.why}")
    print(f"wrote {args.out}; audit it with: topoaudit audit {args.out} --out audit-bundle")
    return 0


def _publish(args: argparse.Namespace) -> int:
    from topoaudit.report.archive import publish

    dest = publish(args.bundle, args.archive, replace=args.replace)
    print(f"published {args.bundle} as {dest}")
    return 0


def _release_folder(release: str, archive: str | None) -> Path:
    """The published release folder that ``signoff``'s RELEASE (and ``--archive``) name."""
    from topoaudit.report.archive import check_name

    if archive is None:
        return Path(release)
    parts = release.split("/")
    if len(parts) != 2:
        msg = (
            f"The release {release!r} is not MODEL/RELEASE; with --archive, name the release "
            "by its model and release names, e.g. meter-failure/2026.2."
        )
        raise TopoauditError(msg)
    return Path(archive) / check_name("model", parts[0]) / check_name("release", parts[1])


def _signoff(args: argparse.Namespace) -> int:
    from topoaudit.report.archive import sign_off

    folder = _release_folder(args.release, args.archive)
    s = sign_off(folder, reviewer=args.reviewer, decision=args.decision, note=args.note)
    print(
        f"sign-off {s.number} of {s.model} {s.release}: {s.decision_words} by {s.reviewer}, "
        f"{s.time}; recorded in {folder / 'signoffs' / f'{s.number:04d}.json'} "
        f"(SHA-256 {s.digest})"
    )
    return 0


def _site_build(args: argparse.Namespace) -> int:
    from topoaudit.report.site import build_site

    with _progress(args) as say:
        out = build_site(
            args.archive,
            args.out,
            site_name=args.name,
            row_ids=args.include_row_ids,
            progress=say,
        )
    print(f"site built: {out / 'index.html'}")
    return 0


def _archive_verify(args: argparse.Namespace) -> int:
    from topoaudit.report.archive import verify_archive

    v = verify_archive(args.archive)
    sys.stdout.write(v.report())
    return 0 if v.ok else 1


def _diff(args: argparse.Namespace) -> int:
    from topoaudit.audit.changes import release_changes
    from topoaudit.audit.lineage import follow, load_release
    from topoaudit.report.diff import diff_markdown
    from topoaudit.report.gate import review_sections

    before, after = load_release(args.before), load_release(args.after)
    regions = review_sections(follow([before, after]).steps[0], before, after)
    sys.stdout.write(diff_markdown(release_changes(args.before, args.after), regions=regions))
    return 0


def _gate(args: argparse.Namespace) -> int:
    from topoaudit.report.gate import run_gate

    code, text = run_gate(
        args.bundle, before=args.before, archive=args.archive, config=args.config, pages=args.pages
    )
    sys.stdout.write(text)
    return code


def _demo(args: argparse.Namespace) -> int:
    from topoaudit.audit.run import run_audit
    from topoaudit.config import load_config
    from topoaudit.demo import write_demo_project
    from topoaudit.report.site import build_site, publish

    out = Path(args.out)
    with _progress(args) as say:
        say(f"writing {args.rows:,} invented water-meter rows and the audit config")
        config_path = write_demo_project(out / "project", args.rows, seed=args.seed)
        config = load_config(config_path)
        archive = out / "archive"
        summaries = []
        n = len(config.releases)
        for k, release in enumerate(config.releases, start=1):
            say_release = _prefixed(say, f"release {k} of {n} ({release.name})")
            audit = run_audit(
                config,
                release=release.name,
                progress=say_release,
                command=audit_command(config_path, out / "bundles" / release.name, release.name),
            )
            say_release("writing the bundle and publishing it")
            bundle = out / "bundles" / release.name
            if bundle.exists():
                shutil.rmtree(bundle)
            _write_bundle(audit, bundle)
            publish(bundle, archive, replace=True)
            inv = audit.analysis.graph.invariants
            summaries.append(
                f"{_summary(audit.analysis)}; graph of {plural(inv.n_nodes, 'node')}, "
                f"{plural(inv.n_edges, 'edge')}, {plural(inv.n_components, 'component')}, "
                f"cycle rank {inv.cycle_rank}, {plural(inv.n_leaves, 'leaf', 'leaves')}, "
                f"{plural(inv.n_branch_points, 'branch point')}"
            )
        site = build_site(
            archive,
            out / "site",
            site_name="Water meter failure model audits",
            progress=_prefixed(say, "site"),
        )
    print()
    for line in summaries:
        print(line)
    if n > 1:
        from topoaudit.report.gate import run_gate

        last = config.releases[-1].name
        code, text = run_gate(out / "bundles" / last, archive=archive)
        (out / f"gate-{last}.md").write_text(text, encoding="utf-8")  # for a pull request
        verdict = {0: "passes", 1: "fails"}.get(code, "cannot decide")
        where = out / f"gate-{last}.md"
        print(f"gate: release {last} {verdict} under the demo's [gate] policy ({where})")
    print(f"home page: {(site / 'index.html').resolve()}")
    return 0


def _progress_options(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--progress",
        choices=PROGRESS_MODES,
        default="auto",
        help="how progress is shown on stderr: 'line' redrawn in place, 'plain' lines, "
        "'quiet' nothing; 'auto' is 'line' on a terminal, else 'plain' (%(default)s)",
    )
    p.add_argument("--quiet", action="store_true", help="no progress messages (--progress quiet)")


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="topoaudit",
        description="Show where a predictive model falls short, organised by the shape of "
        "the data.",
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("check", help="run the graph builder's reference checks and print a table")
    p.add_argument("cases", nargs="*", help="names of the cases to run (default: all)")
    p.add_argument(
        "--stated-only",
        action="store_true",
        help="check the stated settings only, not their neighbourhood",
    )
    p.set_defaults(run=_check)

    p = sub.add_parser(
        "init",
        help="write a starter audit config guessed from a CSV or Parquet file, with reasons",
    )
    p.add_argument("data", help="the validation rows: a .csv or .parquet file")
    p.add_argument(
        "--out", default="audit.toml", help="the config to write; never overwritten (%(default)s)"
    )
    p.add_argument("--id", help="the id column, when more than one could be")
    p.add_argument("--target", help="the target column, when the guess is not the one")
    p.set_defaults(run=_init)

    p = sub.add_parser("audit", help="audit one release and write its bundle")
    p.add_argument("config", help="the audit's TOML config file")
    p.add_argument("--out", required=True, help="folder for the bundle (must be new or empty)")
    p.add_argument("--release", help="release to audit (default: the last in the config)")
    p.add_argument(
        "--previous",
        help="the bundle of the release before, when this release has a data file of its "
        "own: its rows are placed on that release's graph (drift, and regions followed)",
    )
    p.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="run the audit's independent tasks on the Dask cluster whose scheduler is at "
        "ADDRESS (tcp://HOST:PORT); overrides the config's [compute] scheduler, and changes "
        "nothing in the bundle",
    )
    _progress_options(p)
    p.set_defaults(run=_audit)

    p = sub.add_parser("publish", help="add a bundle to the archive as <model>/<release>")
    p.add_argument("bundle", help="the bundle folder written by topoaudit audit")
    p.add_argument("--archive", required=True, help="the archive folder")
    p.add_argument(
        "--replace",
        action="store_true",
        help="replace a published release (the old bundle is kept in the history)",
    )
    p.set_defaults(run=_publish)

    p = sub.add_parser(
        "signoff",
        help="record a reviewer's decision on a published release",
        description="Add a reviewer's decision to a published release of the archive: a "
        "new record beside the bundle (the bundle's own files are not changed), holding the "
        "digest of the bundle signed and chained to the sign-off before it. The release is "
        "named by its folder in the archive (ARCHIVE/MODEL/RELEASE, as topoaudit publish "
        "prints it) or, with --archive, by MODEL/RELEASE. Refused input exits 2.",
    )
    p.add_argument(
        "release",
        metavar="RELEASE",
        help="the published release: ARCHIVE/MODEL/RELEASE, or MODEL/RELEASE with --archive",
    )
    p.add_argument("--archive", help="the archive folder; RELEASE is then MODEL/RELEASE in it")
    p.add_argument("--reviewer", required=True, help="who decides: one line, 1 to 100 characters")
    p.add_argument(
        "--decision",
        required=True,
        metavar="DECISION",
        help="approved, approved-with-conditions or rejected",
    )
    p.add_argument(
        "--note",
        required=True,
        help="why, and any conditions: one line, 1 to 2,000 characters",
    )
    p.set_defaults(run=_signoff)

    p = sub.add_parser("site", help="the static site of an archive")
    site_sub = p.add_subparsers(dest="site_command", required=True, metavar="ACTION")
    q = site_sub.add_parser("build", help="build the site (mkdocs) from the archive")
    q.add_argument("--archive", required=True, help="the archive folder")
    q.add_argument("--out", required=True, help="the folder for the built site")
    q.add_argument("--name", default="Model audits", help="the site's title")
    q.add_argument(
        "--include-row-ids",
        action="store_true",
        help="also list the ids of the rows in each weak region (row-level data; off by "
        "default, when the site holds aggregates only)",
    )
    _progress_options(q)
    q.set_defaults(run=_site_build)

    p = sub.add_parser("archive", help="check the archive of published bundles")
    archive_sub = p.add_subparsers(dest="archive_command", required=True, metavar="ACTION")
    q = archive_sub.add_parser(
        "verify",
        help="compare every bundle with its checksums and check its sign-offs; exit 1 if a "
        "file changed, went missing or was added, or a sign-off record is broken",
    )
    q.add_argument("archive", help="the archive folder")
    q.set_defaults(run=_archive_verify)

    p = sub.add_parser("diff", help="Markdown summary of what changed between two bundles")
    p.add_argument("before", help="the earlier bundle")
    p.add_argument("after", help="the later bundle")
    p.set_defaults(run=_diff)

    p = sub.add_parser(
        "gate",
        help="pass or fail a release under the config's [gate] policy; Markdown for a pull request",
        description="Follow the weak regions from the releases before into this bundle, "
        "apply the [gate] policy and print Markdown for a pull-request comment, the verdict "
        "first. Exit 0: the release passes; 1: it fails a rule; 2: the gate cannot decide "
        "(a bundle missing or unreadable, bundles of two models, a policy key or value that "
        "does not exist, regions that cannot be followed onto the new rows).",
    )
    p.add_argument("bundle", help="the new release's bundle")
    where = p.add_mutually_exclusive_group(required=True)
    where.add_argument("--before", help="the earlier release's bundle")
    where.add_argument(
        "--archive", help="the archive: follow every release of the model published before"
    )
    p.add_argument(
        "--config", help="take the [gate] policy from this config (default: the bundle's own)"
    )
    p.add_argument("--pages", help="the site's address, for links to the pages")
    p.set_defaults(run=_gate)

    p = sub.add_parser("demo", help="the invented water-meter demo: audit, publish, build")
    p.add_argument("--out", default="build/demo", help="folder for everything (%(default)s)")
    p.add_argument("--rows", type=int, default=8000, help="rows to generate (%(default)s)")
    p.add_argument("--seed", type=int, default=7, help="random seed (%(default)s)")
    _progress_options(p)
    p.set_defaults(run=_demo)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``topoaudit`` command; returns the exit status."""
    args = _parser().parse_args(argv)
    try:
        return int(args.run(args))
    except TopoauditError as exc:
        print(f"topoaudit: error: {exc}", file=sys.stderr)
        return 2
    except OSError as exc:  # a disk full, a permission refused: name the file, no traceback
        where = f"{exc.filename}: " if exc.filename else ""
        print(
            f"topoaudit: error: {where}{exc.strerror or exc}; nothing already published was "
            "changed (an interrupted publish is finished by the next one).",
            file=sys.stderr,
        )
        return 2


if __name__ == "__main__":
    sys.exit(main())
