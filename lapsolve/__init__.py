"""lapsolve: 2D Laplace finite elements, certified against exact solutions.

Typical use::

    problem = lapsolve.load_problem("problem.toml")
    solution = lapsolve.solve(problem, order=2)
    solution.capacity, solution.fluxes, solution.energy
"""

from .errors import InputError, LapsolveError
from .output import summary, write_results
from .problem import Problem
from .problem_file import load_problem, problem_from_dict
from .solve import Solution, solve

__version__ = "0.1.0"

__all__ = ["InputError", "LapsolveError", "Problem", "Solution", "load_problem",
           "problem_from_dict", "solve", "summary", "write_results", "__version__"]
