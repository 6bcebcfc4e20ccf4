"""Resuming a fit: the chain's fingerprint, and where a chain to continue is found.

A chain carries, as attributes of its HDF5 file, a fingerprint of everything that decides the
posterior it samples and the path of its walkers: the SHA-256 of every input file, the model,
priors, cosmology, samples (names, methods, column names, selection), the number of walkers, the
seed and whether the selection is modelled. The step cap, the convergence rule and the check
interval are left out, so a capped chain can be continued after raising ``sampler.max_steps``.
A chain is looked for in the output folder and in the staging folders that killed runs left
beside it (docs/method.md#estimators).
"""

import hashlib
import json
from pathlib import Path

from ..errors import ConfigError, InputError
from ..outputs import stale_stages

FINGERPRINT_ATTR = "cosmogrow_fingerprint"
SEED_ATTR = "cosmogrow_seed"
CHAIN_FILE = "chain.h5"
CHAIN_GROUP = "mcmc"  # emcee's HDF5 backend default


def fit_fingerprint(config, data, *, selection_aware):
    """Hex SHA-256 of what decides a fit's chain (see the module note)."""
    described = config.to_dict()
    samples = [{key: value for key, value in sample.items() if key != "path"}
               for sample in described["samples"]]
    payload = {"inputs": [info["sha256"] for info in data.files], "samples": samples,
               "model": described["model"], "priors": described["priors"],
               "cosmology": described["cosmology"], "walkers": described["sampler"]["walkers"],
               "seed": config.seed, "selection_aware": bool(selection_aware)}
    text = json.dumps(payload, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def chain_attrs(fingerprint, seed):
    """Attributes written into a new chain file."""
    return {FINGERPRINT_ATTR: fingerprint, SEED_ATTR: str(seed)}


def chain_info(path):
    """Fingerprint, seed and steps of a chain file.

    Raises
    ------
    InputError
        The file is not a readable chain written by `cosmogrow fit`.
    """
    import h5py

    path = Path(path)
    try:
        with h5py.File(path, "r") as handle:
            group = handle[CHAIN_GROUP]
            iterations = int(group.attrs["iteration"])
            fingerprint = handle.attrs.get(FINGERPRINT_ATTR)
            seed = handle.attrs.get(SEED_ATTR)
    except (OSError, KeyError, ValueError, TypeError) as exc:
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise InputError(path, f"cannot read as a chain written by `cosmogrow fit` ({reason}); "
                         f"give --force to start a new chain") from None
    return {"path": path, "iterations": iterations,
            "fingerprint": fingerprint.decode() if isinstance(fingerprint, bytes) else fingerprint,
            "seed": None if seed is None else int(seed)}


def _candidates(out_dir):
    """Chains in `out_dir` (a corrupt one is an error) and in staging folders of killed runs."""
    out_dir = Path(out_dir)
    found = []
    if (out_dir / CHAIN_FILE).exists():
        found.append(chain_info(out_dir / CHAIN_FILE))
    for stage in stale_stages(out_dir):
        try:
            found.append(chain_info(stage / CHAIN_FILE))
        except InputError:
            continue  # a run killed before (or while) writing its first block of steps
    return [info for info in found if info["iterations"] > 0]


def stored_seed(out_dir):
    """The seed of the longest chain to continue in `out_dir` (or its staging folders), or None."""
    chains = sorted(_candidates(out_dir), key=lambda info: info["iterations"], reverse=True)
    return next((info["seed"] for info in chains if info["seed"] is not None), None)


def find_resumable(out_dir, fingerprint, max_steps, source=None):
    """The chain file `--resume` continues, or None when there is none.

    Parameters
    ----------
    out_dir : path, the fit's output folder
    fingerprint : str, `fit_fingerprint` of this run
    max_steps : int, this run's step cap
    source : str or None, the configuration file (named in the message about max_steps)

    Raises
    ------
    ConfigError
        The folder's chain was made from other inputs, configuration or seed; or the chain to
        continue already has `max_steps` steps.
    """
    chains = _candidates(out_dir)
    matching = [info for info in chains if info["fingerprint"] == fingerprint]
    own = Path(out_dir) / CHAIN_FILE
    if not matching:
        for info in chains:
            if info["path"] == own:
                raise ConfigError(f"{own}: the chain was made from other inputs, configuration or "
                                  f"seed (fingerprint {str(info['fingerprint'])[:12]}, this run "
                                  f"{fingerprint[:12]}); give --force to replace it, or another --out")
        return None
    best = max(matching, key=lambda info: info["iterations"])
    if best["iterations"] >= max_steps:
        where = f"in {source}" if source else "in a --config file ([sampler] max_steps)"
        raise ConfigError(f"{best['path']}: the chain already has {best['iterations']} steps and "
                          f"sampler.max_steps is {max_steps}; raise sampler.max_steps {where} to "
                          f"continue it")
    return best["path"]
