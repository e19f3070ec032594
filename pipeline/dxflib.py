"""ezdxf, imported so that the user's home folder cannot break or change it.

On import ezdxf looks for a configuration file under ``$XDG_CONFIG_HOME``
(else ``~/.config``) and for its font cache under ``$XDG_CACHE_HOME`` (else
``~/.cache``) with ``Path.exists``, which raises instead of answering "no"
when the home folder cannot be searched (a ``sudo -u`` that keeps ``HOME``,
a name over the system's length limit). So:

- the configuration folder is always pointed at the null device for the
  import: snugboard needs none of those settings, and its DXF output must
  not depend on them; ``/dev/null/ezdxf/ezdxf.ini`` answers "not a
  folder", which ``exists`` treats as absent;
- the cache folder is left alone when it can be looked at (the font cache
  is worth keeping); otherwise it and ``HOME`` (where ezdxf also looks for
  font folders) are pointed at the null device: ezdxf then builds the font
  table from the system's font folders in memory, and its warning that it
  cannot save the cache is kept off stderr.

The variables are restored after the import. Every module of snugboard
imports ezdxf through :func:`import_ezdxf`.
"""

from __future__ import annotations

import logging
import os
import sys
from pathlib import Path
from types import ModuleType

__all__ = ["import_ezdxf"]


def _usable(var: str, directory: str) -> bool:
    """Whether ezdxf's folder under ``$var`` (else ``~/directory``) can be looked at."""
    try:
        base = os.environ.get(var)
        home = Path(base).expanduser() if base else Path("~").expanduser() / directory
        (home / "ezdxf").exists()
        return True
    except (OSError, RuntimeError, ValueError):
        return False


def import_ezdxf() -> ModuleType:
    """The ``ezdxf`` module, imported without reading the user's configuration folder.

    Examples
    --------
    >>> import_ezdxf().__name__
    'ezdxf'
    """
    if "ezdxf" in sys.modules:
        return sys.modules["ezdxf"]
    broken_home = not _usable("XDG_CACHE_HOME", ".cache")
    redirect = ["XDG_CONFIG_HOME"] + (["XDG_CACHE_HOME", "HOME"] if broken_home else [])
    saved = {var: os.environ.get(var) for var in redirect}
    log = logging.getLogger("ezdxf")
    was_disabled = log.disabled
    log.disabled = broken_home
    try:
        os.environ.update({var: os.devnull for var in redirect})
        import ezdxf
    finally:
        log.disabled = was_disabled
        for var, value in saved.items():
            if value is None:
                os.environ.pop(var, None)
            else:
                os.environ[var] = value
    return ezdxf
