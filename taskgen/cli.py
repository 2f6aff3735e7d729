"""The `taskgen` command line: a thin shell over taskgen.tools."""

from __future__ import annotations

import json
import os
import shutil
import signal
import sys
import traceback
from typing import Any

import click

from . import limits
from .errors import TaskgenError
from .analysis.policysearch import NODES
from .factory import bundled_specs, resolve_spec
from .manifest import is_manifest
from .spec.loader import parse_assignments
from .spec.reference import json_schema_text, reference_markdown
from .tools import format_text, report_schema, run_check
from .tools.bench import bench_title, format_all, format_bench, run_bench
from .tools.output import locked_folder, refuse_overwrite, write_text_atomic

EXIT_FAILED, EXIT_BAD_INPUT, EXIT_INTERNAL = 1, 2, 3



def limit_options(command: Any) -> Any:
    """--max-work and --max-bytes, on every command that compiles variants."""
    command = click.option("--max-bytes", type=str, help="Cap on one table or picture in bytes (default 512 MiB, "
                           "or TASKGEN_MAX_BYTES).")(command)
    return click.option("--max-work", type=str, help="Cap on states × actions × step limit of one variant "
                        "(default 2e8, or TASKGEN_MAX_WORK).")(command)


set_option = click.option(
    "--set", "sets", multiple=True, metavar="KEY=VALUE",
    help="Override a spec field for this run: a dotted key and a YAML value, e.g. --set layout.corridor.length=20 "
    "(repeatable; validated as the spec is).")


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="taskgen")
def cli() -> None:
    """Compile memory-task specs into checked Gymnasium environments."""


@cli.command()
@click.argument("spec", type=click.Path(dir_okay=False))
@click.option("--variants", "-n", default=1, show_default=True, type=click.IntRange(min=1),
              help="How many variants to compile and analyse.")
@click.option("--seed", "-s", default=0, show_default=True, type=click.IntRange(min=0),
              help="Seed of the first variant; the others follow it.")
@click.option("--min-gap", default=0.0, show_default=True, type=float,
              help="Fail a variant whose memory gap (optimal − chance mean return) is below this.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of tables.")
@limit_options
@click.option("--paths", default=64, show_default=True, type=click.IntRange(min=2),
              help="Hidden values sampled per variant where there are too many to list (a field's paths): "
              "figures are exact on each and averaged with their standard error.")
@click.option("--chance-budget", default=NODES, show_default=True, type=click.IntRange(min=1),
              help="Nodes the search for the best memoryless policy may visit per variant; when it ends first, "
              "chance is an interval (bounded) and a check it cannot decide is undecided.")
@set_option
@click.option("--workers", "-j", default=1, show_default=True, type=click.IntRange(min=1),
              help="Processes to analyse variants in (at most the number of CPUs).")
@click.option("--scheduler", metavar="ADDRESS|local:N", help="Analyse variants on Dask (see `taskgen variants`).")
@click.option("--quiet", "-q", is_flag=True, help="No progress.")
@click.option("--split", help="SPEC is a manifest: check the variants of this split (as listed, fingerprints checked).")
@click.option("--update", is_flag=True, help="With a manifest: write the full figures of the split's variants into it "
              "(for a suite written with --baselines fast or none).")
@click.option("--plot", type=click.Path(dir_okay=False), metavar="FILE.png",
              help="Also draw each variant's memory gap and recall distance as a strip chart into FILE.png "
              "(needs taskgen[plots]).")
def check(spec: str, variants: int, seed: int, min_gap: float, as_json: bool, max_work: str | None,
          max_bytes: str | None, paths: int, chance_budget: int, sets: tuple[str, ...], workers: int,
          scheduler: str | None, quiet: bool, split: str | None, update: bool, plot: str | None) -> None:
    """Validate SPEC, compile variants and check that each is solvable and needs memory.

    Reports solvability, the memory gap and the optimal, chance (best memoryless) and random
    baselines for every task; for a cue task also whether the cue is needed, leaks or is carried
    without memory, the cue-blind baseline and recall distances; for a hidden-path field the
    explorer baseline and the random agent's missteps, exact per sampled path and averaged. The chance
    level is proven (exact) or, when --chance-budget ends the search, an interval (bounded). Exits 0
    when every check passes, 1 when one fails or cannot be decided, 2 on a bad spec.

    SPEC may be a manifest with --split: its listed variants are checked (and with --update their full
    figures written into it, for a suite written with --baselines fast or none).
    """
    if workers > (os.cpu_count() or 1):
        raise click.BadParameter(f"{workers} is more than the {os.cpu_count()} CPUs of this machine",
                                 param_hint="--workers")
    if plot:
        from .tools import plots
        plots.require()      # asked now, not after the run
    if os.path.isfile(spec) and is_manifest(spec):
        if split is None or sets:
            raise click.UsageError(f"{spec}: this is a variant manifest, not a spec; check a split of it with "
                                   "--split NAME (no --set: a manifest fixes its variants)")
        with limits.raised(max_work, max_bytes):
            run = _check_manifest(spec, split, update, min_gap, paths, chance_budget, workers, scheduler, quiet)
    else:
        if split is not None or update:
            raise click.UsageError("--split and --update need a manifest written by `taskgen variants`")
        with limits.raised(max_work, max_bytes):
            loaded = resolve_spec(spec, **parse_assignments(sets))
            run = run_check(loaded, spec, variants=variants, seed=seed, min_gap=min_gap, paths=paths,
                            budget=chance_budget, workers=workers, scheduler=scheduler, progress=not quiet)
    click.echo(json.dumps(run.to_dict(), indent=2) if as_json else format_text(run))
    if plot:
        drawn = plots.strip_plot(plots.report_rows(run.reports), run.spec.name + run.spec.override_tag, plot)
        click.echo(f"drew {drawn}", err=True)
    sys.exit(0 if run.ok else EXIT_FAILED)


def _check_manifest(path: str, split: str, update: bool, min_gap: float, paths: int, budget: int, workers: int,
                    scheduler: str | None, quiet: bool) -> Any:
    """`taskgen check MANIFEST --split S`: the listed variants' reports, and with ``update`` their figures
    written back into the manifest (under its folder's lock)."""
    from .manifest import entry_spec, load_manifest, split_entries, write_manifest
    from .tools.variants import figures_of

    manifest = load_manifest(path, splits=[split])
    entries = split_entries(manifest, split, path)
    listed = [(entry_spec(manifest, entry, path), int(entry["seed"]), str(entry["fingerprint"])) for entry in entries]
    base = entry_spec(manifest, None, path)
    run = run_check(base, path, min_gap=min_gap, paths=paths, budget=budget, workers=workers, scheduler=scheduler,
                    progress=not quiet, listed=listed)
    if update:
        with locked_folder(os.path.dirname(os.path.abspath(path))):
            fresh = load_manifest(path)          # as it is now, under the lock
            by_id = {entry["id"]: figures_of(report) for entry, report in zip(entries, run.reports)}
            for entry in fresh["variants"]:
                if entry["id"] in by_id:
                    entry.update(by_id[entry["id"]])
            write_manifest(fresh, os.path.dirname(os.path.abspath(path)))
        click.echo(f"updated {len(by_id)} variants of split {split} in {path}", err=True)
    return run


@cli.command()
@click.argument("specs", nargs=-1, type=click.Path(dir_okay=False))
@click.option("--all", "every", is_flag=True, help="Every bundled spec (in place of SPECS).")
@click.option("--num-envs", "-n", default=1024, show_default=True, type=click.IntRange(min=1),
              help="Environments in the batched runs.")
@click.option("--seconds", default=1.0, show_default=True, type=click.FloatRange(min=0.05),
              help="About how long to time each runtime.")
@click.option("--sync-envs", type=click.IntRange(min=1), help="Environments in the SyncVectorEnv runs "
              "(default: --num-envs).")
@click.option("--json", "as_json", is_flag=True, help="Print JSON instead of a table.")
@click.option("--out", "-o", type=click.Path(dir_okay=False),
              help="Also write the result to this file: Markdown when it ends in .md, else JSON.")
@set_option
@limit_options
def bench(specs: tuple[str, ...], every: bool, num_envs: int, seconds: float, sync_envs: int | None, as_json: bool,
          out: str | None, sets: tuple[str, ...], max_work: str | None, max_bytes: str | None) -> None:
    """Measure env-steps/s of each SPEC's single and batched envs against references in the same run
    (several SPECS or --all: one row per spec)."""
    if every == bool(specs):
        raise click.UsageError("give SPECS or --all (not both)")
    names = sorted(bundled_specs()) if every else list(specs)
    overrides = parse_assignments(sets)
    with limits.raised(max_work, max_bytes):
        loaded = [resolve_spec(name, **overrides) for name in names]       # every spec validated before any timing
        results = [run_bench(spec, num_envs=num_envs, budget=seconds, sync_envs=sync_envs) for spec in loaded]
    data: Any = results[0] if len(results) == 1 else results
    text = json.dumps(data, indent=2)
    table = format_bench(results[0]) if len(results) == 1 else format_all(results, bench_title())
    click.echo(text if as_json else table)
    if out:
        write_text_atomic(out, (format_all(results, bench_title()) if out.endswith(".md") else text + "\n"))


@cli.command()
@click.argument("spec", type=click.Path(dir_okay=False))
@click.option("--out", "-o", required=True, type=click.Path(file_okay=False),
              help="Folder for manifest.yaml.")
@click.option("--split", "splits", multiple=True, metavar="NAME=COUNT",
              help="A split and its size per sweep point (repeatable; default train=1000 test=200).")
@click.option("--sweep", "sweeps", multiple=True, metavar="KEY=VALUES",
              help="Sweep a spec field, e.g. layout.corridor.length=4,8,16 or =4:16:4 (repeatable).")
@click.option("--zip", "zipped", is_flag=True, help="Pair sweep values in order instead of taking every combination.")
@click.option("--disjoint", is_flag=True, help="No layout fingerprint in two variants (or two splits).")
@click.option("--holdout", metavar="KEY=VALUES",
              help="Values of one drawn parameter kept for the held-out split only, e.g. "
              "layout.corridor.length=13:16.")
@click.option("--holdout-split", default="test", show_default=True, help="The split that gets --holdout values.")
@click.option("--seed", "-s", default=0, show_default=True, type=click.IntRange(min=0),
              help="First variant seed; candidates take consecutive seeds.")
@click.option("--workers", "-j", default=1, show_default=True, type=click.IntRange(min=1),
              help="Processes for drawing and analysing (the manifest is the same for any number); at most the "
              "number of CPUs unless --force.")
@click.option("--force", is_flag=True, help="Replace an existing DIR/manifest.yaml; allow more workers than CPUs.")
@click.option("--scheduler", metavar="ADDRESS|local:N",
              help="Run drawing and analyses on Dask (pip install 'taskgen[dask]'): a running scheduler "
              "(tcp://host:8786) or local:N, a local cluster of N worker processes for this run.")
@click.option("--quiet", "-q", is_flag=True, help="No progress (a bar on a terminal, else a line every few seconds).")
@click.option("--resume", is_flag=True, help="Go on with an interrupted run into the same DIR: the shards of analyses "
              "it finished (DIR/shards/, checked by hash) are read back, not redone.")
@click.option("--baselines", type=click.Choice(["full", "fast", "none"]), default="full", show_default=True,
              help="Analyses per variant: full (every baseline, the certified chance level and the checks), fast "
              "(optimal and random only, no chance search) or none.")
@click.option("--plot", is_flag=True, help="Also draw DIR/sweep-<KEY>.png per swept key (each baseline's return "
              "against the key) or, without a sweep, DIR/variants.png (each variant's memory gap and recall "
              "distance); needs taskgen[plots].")
@set_option
@limit_options
def variants(spec: str, out: str, splits: tuple[str, ...], sweeps: tuple[str, ...], zipped: bool,
             disjoint: bool, holdout: str | None, holdout_split: str, seed: int, workers: int,
             sets: tuple[str, ...], max_work: str | None, max_bytes: str | None, force: bool, scheduler: str | None,
             quiet: bool, baselines: str, resume: bool, plot: bool) -> None:
    """Generate a reproducible suite of variants of SPEC with held-out splits, as DIR/manifest.yaml
    (byte for byte the same for any --workers or --scheduler)."""
    from .tools import plots
    from .tools.variants import SuiteRequest, build_suite, parse_assignment, parse_splits, write_manifest

    cpus = os.cpu_count() or 1
    if workers > cpus and not force:
        raise click.BadParameter(f"{workers} is more than the {cpus} CPUs of this machine (give --force to run "
                                 "that many anyway)", param_hint="--workers")

    request = SuiteRequest(
        splits=parse_splits(splits) if splits else (("train", 1000), ("test", 200)),
        sweeps=tuple(parse_assignment(item) for item in sweeps), zipped=zipped, disjoint_layouts=disjoint,
        holdout=parse_assignment(holdout) if holdout else None, holdout_split=holdout_split, seed=seed,
        baselines=baselines)
    loaded = resolve_spec(spec, **parse_assignments(sets))
    pictures = [f"sweep-{key}.png" for key, _ in request.sweeps] if request.sweeps else ["variants.png"]
    if plot:     # asked now, not after the run
        plots.require()
        if baselines == "none" or (baselines == "fast" and not request.sweeps):
            raise click.UsageError(f"--plot needs figures: {'a sweep or ' if baselines == 'fast' else ''}"
                                   "--baselines full")
    with limits.raised(max_work, max_bytes), locked_folder(out) as folder:
        refuse_overwrite([folder / "manifest.yaml"] + ([folder / p for p in pictures] if plot else []), force,
                         "taskgen variants")
        manifest = build_suite(loaded, request, workers=workers, scheduler=scheduler, progress=not quiet,
                               shards=str(folder / "shards"), resume=resume)
        path = write_manifest(manifest, out)
        shutil.rmtree(folder / "shards", ignore_errors=True)     # the manifest holds every figure now
        if plot:
            drawn = plots.sweep_plots(manifest, folder) if request.sweeps else \
                [plots.strip_plot(plots.entry_rows(manifest["variants"]), loaded.name, folder / "variants.png")]
            click.echo("drew " + ", ".join(str(p) for p in drawn), err=True)
    counts: dict[str, int] = {}
    for v in manifest["variants"]:
        counts[v["split"]] = counts.get(v["split"], 0) + 1
    layouts = len({v["fingerprint"] for v in manifest["variants"]})
    click.echo(f"wrote {path}: " + ", ".join(f"{n} {name}" for name, n in counts.items())
               + f" variants, {layouts} distinct layouts"
               + (f" (the family has {manifest['family_size']:,})" if manifest["family_size"] else ""))


@cli.command()
@click.argument("manifest", type=click.Path(dir_okay=False, exists=True))
@click.option("--policy", required=True, metavar="MODULE:FACTORY",
              help="Where your policy comes from: FACTORY(observation_space, action_space) returns a callable from "
              "a batch of observations to a batch of actions (optionally with reset(mask) for recurrent state).")
@click.option("--split", default="test", show_default=True, help="The split to play.")
@click.option("--episodes", "-n", default=100, show_default=True, type=click.IntRange(min=1),
              help="Episodes per variant.")
@click.option("--num-envs", default=64, show_default=True, type=click.IntRange(min=1),
              help="Environments stepped together (each plays a fixed share of a variant's episodes).")
@click.option("--seed", "-s", default=0, show_default=True, type=click.IntRange(min=0),
              help="Reset seed of the first environment (env i gets seed + i).")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
@click.option("--out", "-o", type=click.Path(file_okay=False),
              help="Also write DIR/evaluation.json and DIR/episodes.jsonl (which `taskgen score` reads).")
@limit_options
def evaluate(manifest: str, policy: str, split: str, episodes: int, num_envs: int, seed: int, as_json: bool,
             out: str | None, max_work: str | None, max_bytes: str | None) -> None:
    """Run a policy on every variant of a split of MANIFEST and score it against the suite's baselines.

    Per variant: success rate with an exact (Clopper–Pearson) interval, mean return ± SE, the score
    normalised between chance and optimal, and a one-sided exact binomial test of success against the
    chance success rate, Holm-corrected across variants.
    """
    from .tools.evaluate import format_evaluation, load_policy, run_policy, score, suite_spaces, write_episodes
    from .manifest import load_manifest

    with limits.raised(max_work, max_bytes):
        chosen = load_policy(policy, *suite_spaces(manifest, split))
        played = run_policy(chosen, manifest, split, episodes=episodes, num_envs=num_envs, seed=seed)
    result = score(played, load_manifest(manifest, splits=[split]), split)
    text = json.dumps(result.to_dict(), indent=2)
    click.echo(text if as_json else format_evaluation(result), nl=as_json)
    if out:
        write_episodes(played, os.path.join(out, "episodes.jsonl"))
        write_text_atomic(os.path.join(out, "evaluation.json"), text + "\n")
        click.echo(f"wrote {os.path.join(out, 'evaluation.json')} and episodes.jsonl", err=True)


@cli.command(name="score")
@click.argument("episodes", type=click.Path(dir_okay=False, exists=True))
@click.option("--manifest", "-m", required=True, type=click.Path(dir_okay=False, exists=True),
              help="The suite the episodes were played on.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
def score_command(episodes: str, manifest: str, as_json: bool) -> None:
    """Score episodes you logged (EPISODES: one JSON line each, {"variant_id", "return", "success"}) against
    the baselines of MANIFEST, as `taskgen evaluate` does."""
    from .tools.evaluate import format_evaluation, read_episodes, score
    from .manifest import load_manifest

    result = score(read_episodes(episodes), load_manifest(manifest), "logged")
    click.echo(json.dumps(result.to_dict(), indent=2) if as_json else format_evaluation(result), nl=as_json)


@cli.command(name="gallery")
@click.argument("specs", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("--out", "-o", required=True, type=click.Path(file_okay=False), help="Folder of the galleries.")
@click.option("--episodes", "-n", default=1, show_default=True, type=click.IntRange(min=1),
              help="Episodes per variant.")
@click.option("--variants", "count", default=3, show_default=True, type=click.IntRange(min=1, max=100),
              help="Variants per spec, each a section of the page with its baselines and checks.")
@click.option("--policy", type=click.Choice(["auto", "optimal", "random", "chance", "explorer"]), default="auto",
              show_default=True, help="Who plays: optimal (knows the cue or the path), random, the best "
              "memoryless policy, or on fields the explorer (remembers its missteps); auto: optimal, or the "
              "explorer on fields.")
@click.option("--seed", "-s", default=0, show_default=True, type=click.IntRange(min=0),
              help="Seed of the first episode.")
@click.option("--variant", default=0, show_default=True, type=click.IntRange(min=0),
              help="Seed of the first variant; the others follow it.")
@click.option("--force", is_flag=True, help="Replace existing gallery pages and pictures in DIR.")
@click.option("--scale", type=click.IntRange(min=1, max=16), help="Whole factor the agent's view is enlarged by "
              "(nearest neighbour); by default the smallest that makes a frame at least 160 px high.")
@click.option("--quiet", "-q", is_flag=True, help="No progress.")
@set_option
@limit_options
def gallery_command(specs: tuple[str, ...], out: str, episodes: int, count: int, policy: str, seed: int, variant: int,
                    sets: tuple[str, ...], max_work: str | None, max_bytes: str | None, force: bool,
                    scale: int | None, quiet: bool) -> None:
    """Render episode filmstrips, animations and index pages for each SPEC into DIR."""
    from .tools.gallery import gallery

    with limits.raised(max_work, max_bytes):
        pages = gallery(list(specs), out, episodes=episodes, policy=policy, seed=seed, variant_seed=variant,
                        overrides=parse_assignments(sets), force=force, progress=not quiet, scale=scale,
                        variants=count)
    for page in pages:
        click.echo(f"wrote {page}")


def _emit(text: str, out: str | None) -> None:
    if out is None:
        click.echo(text, nl=False)
    else:
        write_text_atomic(out, text)
        click.echo(f"wrote {out}", err=True)


@cli.command()
@click.option("--report", is_flag=True, help="The schema of `taskgen check --json` instead of the spec language's.")
@click.option("--out", "-o", type=click.Path(dir_okay=False), help="Write to this file instead of stdout.")
def schema(report: bool, out: str | None) -> None:
    """Print the JSON Schema (draft 2020-12) of the spec language, for editors (or, with --report, of
    the check report)."""
    _emit(json.dumps(report_schema(), indent=2, ensure_ascii=False) + "\n" if report else json_schema_text(), out)


@cli.command()
@click.option("--out", "-o", type=click.Path(dir_okay=False), help="Write to this file instead of stdout.")
def reference(out: str | None) -> None:
    """Print the spec reference (Markdown), generated from the same models as the schema."""
    _emit(reference_markdown(), out)


def _terminated(signum: int, frame: Any) -> None:
    """SIGTERM ends a run as Ctrl-C does: temporary files are removed and worker pools stopped."""
    raise SystemExit(128 + signum)


def main() -> None:
    """Entry point: bad input exits 2 with a located message, never a traceback."""
    signal.signal(signal.SIGTERM, _terminated)
    try:
        cli.main(standalone_mode=False)
    except click.exceptions.Abort:
        click.echo("aborted", err=True)
        sys.exit(130)
    except click.ClickException as exc:
        exc.show()
        sys.exit(EXIT_BAD_INPUT)
    except TaskgenError as exc:
        click.echo(f"error: {exc}", err=True)
        sys.exit(EXIT_BAD_INPUT)
    except SystemExit:
        raise
    except Exception as exc:  # a bug in taskgen: say so plainly, trace only on request
        if os.environ.get("TASKGEN_DEBUG"):
            traceback.print_exc()
        click.echo(f"internal error: {type(exc).__name__}: {exc} (set TASKGEN_DEBUG=1 for a trace)", err=True)
        sys.exit(EXIT_INTERNAL)


if __name__ == "__main__":
    main()
