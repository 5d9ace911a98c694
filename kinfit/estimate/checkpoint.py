"""The sampler's checkpoint on disk, and atomic file writing.

A checkpoint is one ``.npz`` file holding everything needed to continue a run exactly where it
stopped: the chain in internal coordinates, the log-probabilities, the accepted-move counts,
the state of the sampler's random number generator after the last stored step, and the
settings that must not change on resume. It is rewritten after every chunk of steps, and once
more when a run is interrupted, always atomically (a temporary file in the same folder, then
:func:`os.replace`), so a crash or a Ctrl-C never leaves a half-written file behind.
"""

from __future__ import annotations

import json
import os
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Any

import numpy as np
from numpy.typing import NDArray

from kinfit.core.files import atomic_path
from kinfit.errors import StudyError

__all__ = ["Checkpoint", "atomic_write", "save_checkpoint", "load_checkpoint", "FORMAT_VERSION"]

#: Version of the checkpoint layout; a file of another version is refused with a message.
FORMAT_VERSION = 1

#: Settings that must agree between a checkpoint and the run that resumes it.
#: The start point and the starting scales are not among them: they only place the walkers of
#: step 0, which the stored chain already holds.
IDENTITY_KEYS = (
    "names",
    "n_walkers",
    "seed",
    "sample_scale",
    "fixed_scales",
    "priors",
    "problem",
    "moves",
)


def atomic_write(
    path: str | os.PathLike[str], write: Callable[[IO[Any]], None], *, text: bool = False
) -> Path:
    """Write a file so that readers see either the old content or the complete new one.

    Parameters
    ----------
    path : path-like
        Destination. Its folder must exist.
    write : callable
        Receives an open file object (binary, or text when ``text``) and writes the content.
    text : bool
        Open the temporary file in text mode (UTF-8, ``newline=""``).

    Returns
    -------
    Path
        The destination.

    Notes
    -----
    The content goes to a temporary file in the destination folder, is flushed and synced, and
    then replaces the destination with :func:`os.replace`, which is atomic on POSIX and Windows
    when both names are on one file system (hence the same folder).
    """
    dest = Path(path)
    folder = dest.parent if str(dest.parent) else Path(".")
    if not folder.is_dir():
        raise StudyError(f"cannot write '{dest}': folder '{folder}' does not exist; create it")

    mode = "w" if text else "wb"
    kwargs: dict[str, Any] = {"encoding": "utf-8", "newline": ""} if text else {}
    with atomic_path(dest) as tmp, open(tmp, mode, **kwargs) as fh:
        write(fh)
        fh.flush()
        os.fsync(fh.fileno())
    return dest


@dataclass(frozen=True)
class Checkpoint:
    """Everything needed to continue an ensemble run.

    Attributes
    ----------
    chain : ndarray, shape (n_steps, n_walkers, d)
        Walker positions in the sampler's internal coordinates.
    log_prob : ndarray, shape (n_steps, n_walkers)
        Log-posterior of each position.
    accepted : ndarray, shape (n_walkers,)
        Accepted proposals per walker over the ``n_steps`` steps.
    random_state : tuple
        State of the sampler's ``numpy.random.RandomState`` (MT19937) after the last step, as
        ``RandomState.get_state()`` returns it.
    settings : dict
        JSON-compatible settings; :data:`IDENTITY_KEYS` must match on resume.
    """

    chain: NDArray[np.float64]
    log_prob: NDArray[np.float64]
    accepted: NDArray[np.float64]
    random_state: tuple[Any, ...]
    settings: dict[str, Any]

    @property
    def n_steps(self) -> int:
        """Number of stored steps."""
        return int(self.chain.shape[0])

    def check_matches(self, settings: Mapping[str, Any], path: str | os.PathLike[str]) -> None:
        """Raise :class:`StudyError` naming every identity setting that differs.

        Parameters
        ----------
        settings : mapping
            Settings of the run that wants to resume, in the same JSON-compatible form.
        path : path-like
            The checkpoint file, for the message.
        """
        diff = []
        for key in IDENTITY_KEYS:
            old, new = self.settings.get(key), settings.get(key)
            if _canon(old) != _canon(new):
                diff.append(f"{key}: checkpoint {_short(old)}, now {_short(new)}")
        if diff:
            raise StudyError(
                f"checkpoint '{path}' was written by a different run ("
                + "; ".join(diff)
                + "); resume with the same problem and settings, or set resume=False to start "
                "over"
            )


def _canon(value: Any) -> str:
    return json.dumps(value, sort_keys=True, default=str)


def _short(value: Any) -> str:
    text = _canon(value)
    return text if len(text) <= 60 else text[:57] + "..."


def save_checkpoint(path: str | os.PathLike[str], ckpt: Checkpoint) -> Path:
    """Write ``ckpt`` to ``path`` atomically (see :func:`atomic_write`).

    The file is an uncompressed ``.npz`` whatever the name; it holds no pickled objects.
    """
    name, key, pos, has_gauss, cached = ckpt.random_state
    arrays = {
        "format_version": np.array(FORMAT_VERSION),
        "chain": np.asarray(ckpt.chain, dtype=float),
        "log_prob": np.asarray(ckpt.log_prob, dtype=float),
        "accepted": np.asarray(ckpt.accepted, dtype=float),
        "rng_name": np.array(str(name)),
        "rng_key": np.asarray(key, dtype=np.uint32),
        "rng_pos": np.array(int(pos)),
        "rng_has_gauss": np.array(int(has_gauss)),
        "rng_cached_gaussian": np.array(float(cached)),
        "settings": np.array(json.dumps(ckpt.settings, sort_keys=True, default=str)),
    }
    return atomic_write(path, lambda fh: np.savez(fh, **arrays))  # type: ignore[arg-type]


def load_checkpoint(path: str | os.PathLike[str]) -> Checkpoint:
    """Read a checkpoint written by :func:`save_checkpoint`.

    Raises
    ------
    StudyError
        The file is missing, unreadable, or of another format version.
    """
    p = Path(path)
    if not p.is_file():
        raise StudyError(
            f"checkpoint '{p}' does not exist; run without resume to start a new chain"
        )
    try:
        with np.load(p, allow_pickle=False) as z:
            version = int(z["format_version"])
            if version != FORMAT_VERSION:
                raise StudyError(
                    f"checkpoint '{p}' has format version {version}, this kinfit reads "
                    f"{FORMAT_VERSION}; start a new run"
                )
            state = (
                str(z["rng_name"]),
                np.array(z["rng_key"], dtype=np.uint32),
                int(z["rng_pos"]),
                int(z["rng_has_gauss"]),
                float(z["rng_cached_gaussian"]),
            )
            return Checkpoint(
                chain=np.array(z["chain"], dtype=float),
                log_prob=np.array(z["log_prob"], dtype=float),
                accepted=np.array(z["accepted"], dtype=float),
                random_state=state,
                settings=json.loads(str(z["settings"])),
            )
    except StudyError:
        raise
    except (OSError, KeyError, ValueError) as exc:
        raise StudyError(
            f"checkpoint '{p}' cannot be read ({exc}); delete it and start a new run"
        ) from exc
