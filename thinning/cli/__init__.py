"""The ``thinning`` command: a thin shell over the library.

Every subcommand lives in a module of its own here and is registered on :data:`cli`.
:func:`main` turns every expected failure (bad input, unwritable output) into one line on
stderr and a non-zero exit status, never a traceback.

Exit status: 0 success, 1 bad input or output problem, 2 bad command line, 130 interrupted.
"""

from __future__ import annotations

import os
import sys

# The pattern engine makes many small BLAS calls (refinement, reductions); a threaded BLAS
# only contends with itself and with our worker processes there, erratically so on a loaded
# machine. One thread per process, unless the user asked otherwise. Set before numpy loads.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import click  # noqa: E402

from .. import __version__  # noqa: E402
from ..errors import ThinningError  # noqa: E402

__all__ = ["cli", "main"]


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.version_option(__version__, prog_name="thinning")
def cli():
    """Thin a phased array to an element budget with the lowest sidelobes over its scan cone.

    Positions are in millimetres, frequencies in GHz, angles in degrees, levels in dB.
    """


def _register():
    from . import score  # noqa: F401  (each module adds its command to `cli`)

    for name in ("design", "export", "sweep", "stress", "sites"):
        try:
            __import__(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name != f"{__name__}.{name}":
                raise


def main(argv=None) -> int:
    """Run the command line; returns the exit status."""
    _register()
    prog = "thinning"
    try:
        # a command's ctx.exit(status) comes back as the return value (click ≥ 8.2)
        status = cli.main(args=argv, prog_name=prog, standalone_mode=False)
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except click.UsageError as exc:
        cmd = exc.ctx.command_path if exc.ctx is not None else prog
        click.echo(f"{cmd}: error: {exc.format_message()}", err=True)
        return 2
    except click.Abort:
        click.echo(f"{prog}: interrupted", err=True)
        return 130
    except ThinningError as exc:
        click.echo(f"{prog}: error: {exc}", err=True)
        return 1
    except KeyboardInterrupt:
        click.echo(f"{prog}: interrupted", err=True)
        return 130
    except click.ClickException as exc:
        click.echo(f"{prog}: error: {exc.format_message()}", err=True)
        return exc.exit_code or 1
    return status if isinstance(status, int) else 0


if __name__ == "__main__":
    sys.exit(main())
