"""What produced a report (software, machine, time) and what it does not claim."""

import os
import platform
import sys
from datetime import datetime, timezone

CAUTION = ("This report verifies numerics, not a design: it shows that the solver converges "
           "at the expected rates to known exact solutions. Where results feed "
           "safety-relevant design (insulation, high voltage, thermal limits), local codes "
           "and licensed engineering practice govern.")


def _version(module_name):
    try:
        module = __import__(module_name)
    except ImportError:
        return "not installed"
    return str(getattr(module, "__version__", "unknown"))


def software_versions():
    """Versions of the software the numbers depend on."""
    import lapsolve

    return {
        "lapsolve": lapsolve.__version__,
        "python": sys.version.split()[0],
        "numpy": _version("numpy"),
        "scipy": _version("scipy"),
        "scikit-fem": _version("skfem"),
        "matplotlib": _version("matplotlib"),
        "platform": platform.platform(),
    }


def machine_info():
    """CPU count and load average (timings depend on them)."""
    try:
        load = [round(v, 2) for v in os.getloadavg()]
    except (AttributeError, OSError):
        load = None
    return {"cpus": os.cpu_count(), "load_average": load, "machine": platform.machine()}


def timestamp():
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
