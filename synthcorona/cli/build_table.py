"""``synthcorona build-table``: build an emissivity table from a CHIANTI copy.

``--out FILE`` is checked before the build (not an empty name, not a folder, its folder writable or
creatable) and locked while the build lasts (a second build into the same file is refused); the
table is written beside it in a staging folder and moves into place (``os.replace``) only when
complete, so a failed or interrupted build leaves an earlier table of that name untouched
(:class:`synthcorona.io.output_folder.OutputFile`)."""
from __future__ import annotations

NAME = "build-table"
HELP = "build an emissivity table from a CHIANTI copy"
#: The text of ``synthcorona build-table --help`` (plain text).
DESCRIPTION = """\
Build an emissivity table (one netCDF file, --out) from a CHIANTI copy, one task per ion on a
local dask cluster (--jobs) or a scheduler (--scheduler). Per-ion results are kept in --work-dir,
so an interrupted build resumes where it stopped. Needs fiasco (Python 3.12).
"""


def add_arguments(p) -> None:
    """Options of ``synthcorona build-table``."""
    p.add_argument("--chianti", help="ASCII CHIANTI tree or .tar.xz (default: $SYNTHCORONA_CHIANTI, then fiasco's)")
    p.add_argument("--out", required=True, metavar="FILE",
                   help="netCDF file to write (checked before the build, locked while it lasts, replaced only by a "
                        "complete table)")
    p.add_argument("--jobs", "-j", type=int, default=0,
                   help="worker processes of the local dask cluster (default 0: one per CPU core; "
                        "1: no cluster, run in this process)")
    p.add_argument("--scheduler", default=None,
                   help="dask scheduler address (tcp://host:port) to run the ions on a cluster; the work dir "
                        "and the CHIANTI copy must then be on a file system shared with the workers "
                        "(default: $SYNTHCORONA_SCHEDULER, else the local cluster of --jobs)")
    p.add_argument("--retries", type=int, default=2,
                   help="times an ion is rerun after its task failed or its worker died (default 2)")
    p.add_argument("--work-dir", help="directory for per-ion results (resumable; default: user cache)")
    p.add_argument("--elements", nargs="+", help="element symbols (default: photospheric abundance >= 1e-7 of H)")
    p.add_argument("--logT-min", type=float, default=4.5, help="lowest log10 T [K] (default 4.5)")
    p.add_argument("--logT-max", type=float, default=8.5, help="highest log10 T [K] (default 8.5)")
    p.add_argument("--logT-step", type=float, default=0.05, help="log10 T step [dex] (default 0.05)")
    p.add_argument("--log-densities", type=float, nargs="+", default=[8, 9, 10, 11, 12],
                   help="log10 electron densities [cm-3] (default 8 9 10 11 12)")
    p.add_argument("--energy-points", type=int, default=1000, help="continuum grid points, 1 eV-50 keV (default 1000)")
    p.add_argument("--line-threshold", type=float, default=1e-3,
                   help="largest share of an ion's line emission the dropped weak lines may carry (default 1e-3)")
    p.add_argument("--two-ion-max-levels", type=int, default=None,
                   help="use the two-ion level model only up to this many levels (default: always)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")


def run(args) -> int:
    """Build the table and print where it was written; returns 0."""
    import numpy as np

    from ..atomic.builder import BuildSettings, build_table, default_energy_grid
    from ..io.output_folder import OutputFile

    output = OutputFile(args.out, argv=getattr(args, "command_line", None))
    logT = np.round(np.arange(args.logT_min, args.logT_max + 1e-9, args.logT_step), 6)
    settings = BuildSettings(logT=logT, log_density=np.array(args.log_densities, dtype=float),
                             energy=default_energy_grid(args.energy_points), elements=args.elements,
                             line_threshold=args.line_threshold, two_ion_max_levels=args.two_ion_max_levels)
    with output:
        build_table(output.path(), chianti=args.chianti, settings=settings, jobs=args.jobs, work_dir=args.work_dir,
                    progress=not args.quiet, scheduler=args.scheduler, retries=args.retries)
    print(f"wrote {output.target}")
    return 0
