"""A study's initial states, as :func:`phaselab.section` takes them (shared by the trial run
of ``check`` and by ``render``)."""

from __future__ import annotations

import numpy as np

from phaselab.errors import StudyFileError
from phaselab.orbits.seeds import shell_seeds
from phaselab.studies.spec import Study


def seed_states(study: Study):
    """The initial states of the study, as :func:`phaselab.section` takes them.

    Returns
    -------
    seeds : ShellSeeds or ndarray, shape (n_orbits, 2n)
        A :class:`~phaselab.orbits.seeds.ShellSeeds` when the study solves a momentum from
        the energy, else full states.
    """
    spec, seeds = study.section, study.states
    system = study.system
    names = [s.name for s in system.state_symbols]
    columns = {name: seeds.values[:, i] for i, name in enumerate(seeds.columns)}
    if seeds.solve_for is not None:
        return shell_seeds(system, columns, energy=spec.energy, plane={spec.coordinate: spec.value},
                           solve_for=seeds.solve_for, params=study.params, sign=spec.direction)
    states = np.empty((seeds.count, len(names)))
    for j, name in enumerate(names):
        if name in columns:
            states[:, j] = columns[name]
        elif name == spec.coordinate:
            states[:, j] = spec.value
        else:  # pragma: no cover - the reader refuses seeds that leave a component out
            raise StudyFileError(f"{study.source}: states: no value for {name}")
    return states
