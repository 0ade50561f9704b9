"""Settings files: TOML in (tomllib) and out (tomli_w), atomically, with clear errors."""

import os
import tomllib

from analysis.errors import SettingsError, missing
from analysis.settings._settings import SCHEMA_VERSION, Settings

__all__ = ["load_settings", "save_settings"]


def load_settings(path: str | os.PathLike) -> Settings:
    """Read settings from a TOML file (missing keys take their defaults).

    Raises
    ------
    SettingsError
        When the file is missing, unreadable, not TOML, or holds a wrong key or value.
    """
    p = os.fspath(path)
    try:
        with open(p, "rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        problem, fix = missing(p, "settings file")
        raise SettingsError(p, problem.replace("no such settings file", "the settings file does not exist"), fix) from None
    except IsADirectoryError:
        raise SettingsError(p, "is a folder, not a settings file", "give a .toml file") from None
    except OSError as exc:
        if os.path.islink(p):  # a loop of links (ELOOP)
            raise SettingsError(p, *missing(p, "settings file")) from None
        raise SettingsError(p, f"cannot read the settings file ({exc.strerror})", "check its permissions") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise SettingsError(p, f"is not valid TOML ({exc})", "fix the line named or save the settings again") from None
    return Settings.from_dict(data, origin=p)


def save_settings(settings: Settings, path: str | os.PathLike) -> None:
    """Write settings as TOML, atomically (a temporary file, then a rename).

    Unset optional values are left out (TOML has no null); :func:`load_settings` reads them
    back as unset.
    """
    import tomli_w  # only writing settings needs it

    p = os.fspath(path)
    data = settings.to_dict()
    for key in Settings.sections():
        data[key] = {k: v for k, v in data[key].items() if v is not None}
    text = (
        f"# Upstroke analysis settings (schema {SCHEMA_VERSION}, hash {settings.short_hash()}).\n"
        "# Leave a key out to use its default.\n" + tomli_w.dumps(data)
    )
    folder = os.path.dirname(os.path.abspath(p))
    tmp = os.path.join(folder, f".{os.path.basename(p)}.tmp-{os.getpid()}")
    try:
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except OSError as exc:
        if os.path.exists(tmp):
            os.remove(tmp)
        raise SettingsError(p, f"cannot write the settings file ({exc.strerror})", "choose a folder you can write to") from None
