"""``qualplan record import`` and ``qualplan record show``: long multi-channel records.

The file is read in chunks (qualplan.io.streams) and stored in compressed chunks
(planning.records); no step holds the whole record.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from qualplan.cli.base import CliError, DbOption, app
from qualplan.cli.common import ProgramOption, _program, local_actor, work
from qualplan.cli.output import emit_json, table
from qualplan.planning import catalog, records, wording

record_app = typer.Typer(rich_markup_mode=None,
    help="Long multi-channel records stored in chunks.",
                         no_args_is_help=True)
app.add_typer(record_app, name="record")

JsonOption = Annotated[bool, typer.Option("--json", help="Print JSON instead of a table.")]


def _floats(text: str | None, what: str) -> list[float] | None:
    if text is None:
        return None
    try:
        return [float(v) for v in text.split(",")]
    except ValueError as exc:
        raise CliError(f"{what}={text!r}: must be numbers separated by commas") from exc


def _print(rec: records.RecordRead, as_json: bool) -> None:
    if as_json:
        emit_json(rec.model_dump(mode="json"))
        return
    typer.echo(f"environment {rec.environment_id} revision {rec.revision}: "
               f"{len(rec.channels)} channels x {rec.n_samples} samples at "
               f"{wording.frequency(rec.fs_hz)} ({wording.duration(rec.duration_s)}), "
               f"{rec.n_chunks} chunks of {rec.chunk_samples} "
               f"samples per channel, hash {rec.content_hash[:12]}")
    table(["channel", "axis", "unit", "rms [g]", "peak [g]", "mean [g]", "factor to g"],
          [[c.name, c.axis, c.unit, c.stats["rms"]["value"], c.stats["peak"]["value"],
            c.stats["mean"]["value"], c.calibration] for c in rec.channels])


@record_app.command("import")
def record_import(
    file: Annotated[Path, typer.Argument(help="Record file: .csv/.txt, .npy, .wav, .mat, "
                                          ".h5/.hdf5, .uff/.unv.")],
    channel_axes: Annotated[str, typer.Option(
        "--channel-axes", help="One axis per channel in file order, e.g. X,Y,Z.")],
    unit: Annotated[str, typer.Option(help="Unit of the file's values (g, m/s^2, ...).")],
    product: Annotated[str | None, typer.Option(help="Product name or id (new environment)."
                                                )] = None,
    name: Annotated[str | None, typer.Option(help="Name of the new environment.")] = None,
    environment: Annotated[int | None, typer.Option(
        help="Id of a time-history environment to revise instead.")] = None,
    fs_hz: Annotated[float | None, typer.Option(
        "--fs-hz", help="Sample rate [Hz] (.npy, .mat, .h5, CSV without a time column).")] = None,
    calibration: Annotated[str | None, typer.Option(
        help="Calibration factor, or one per channel separated by commas.")] = None,
    variable: Annotated[str | None, typer.Option(help="Variable of a .mat file.")] = None,
    dataset: Annotated[str | None, typer.Option(help="Dataset of an HDF5 file.")] = None,
    chunk_samples: Annotated[int, typer.Option(help="Samples per stored chunk.")] = 65_536,
    note: str = "",
    program: ProgramOption = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Import a long multi-channel record in chunks (channels by column)."""
    ext = file.suffix.lower()
    options: dict = {"unit": unit}
    cal = _floats(calibration, "--calibration")
    if ext == ".wav":
        options["calibration"] = cal if cal is not None else 1.0
    elif cal is not None:
        options["calibration"] = cal if len(cal) > 1 else cal[0]
    if ext in (".csv", ".txt"):
        if fs_hz is not None:
            options.update(fs_hz=fs_hz, time_column=None)
    elif ext not in (".wav", ".uff", ".unv"):
        if fs_hz is None:
            raise CliError(f"--fs-hz is required for a {ext} file")
        options["fs_hz"] = fs_hz
    if ext == ".mat":
        if variable is None:
            raise CliError("--variable is required for a .mat file")
        options["variable"] = variable
    if ext in (".h5", ".hdf5"):
        if dataset is None:
            raise CliError("--dataset is required for an HDF5 file")
        options["dataset"] = dataset
    src = records.open_record_file(file, **options)
    axes = records.parse_axes(channel_axes)
    with work(db) as session:
        product_id = None
        if environment is None:
            if product is None or name is None:
                raise CliError("give --product and --name for a new environment, or "
                               "--environment to revise one")
            product_id = catalog.product_ref(session, _program(session, program), product).id
        rec = records.import_record(
            session, local_actor(),
            records.RecordImport(product_id=product_id, name=name, environment_id=environment,
                                 channel_axes=axes, source=file.name, note=note),
            src, chunk_samples=chunk_samples)
    _print(rec, as_json)


@record_app.command("show")
def record_show(
    revision_id: Annotated[int, typer.Argument(help="Revision id of the record.")],
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Show a stored record: rate, length, channels and their statistics."""
    with work(db) as session:
        rec = records.read_record(session, revision_id)
    _print(rec, as_json)
