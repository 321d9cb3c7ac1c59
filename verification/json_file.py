"""Reading a JSON object from a user-supplied file, with one-line errors."""

import json
from pathlib import Path

from lapsolve.errors import InputError


def read_json_object(path, what):
    """The JSON object in ``path``; ``what`` names it in errors ("manifest", "run report").

    Raises
    ------
    InputError
        Missing or unreadable file, invalid or too deeply nested JSON, or JSON that
        is not an object.
    """
    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"{what} not found", source=str(path)) from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"unreadable {what} ({exc})", source=str(path)) from None
    except RecursionError:
        raise InputError(f"unreadable {what} (nested too deeply)", source=str(path)) from None
    if not isinstance(data, dict):
        raise InputError(f"a {what} is a JSON object", source=str(path))
    return data
