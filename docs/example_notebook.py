# %% [markdown]
# # The depot ring in a notebook
#
# Open this file in Jupyter (jupytext) or VS Code as a notebook, or run it as a script from
# the repository root: `python docs/example_notebook.py`. It uses the sample run
# `samples/depot-ring.zarr` (our invented scenario: 64 depots on a ring, parcels handed
# on clockwise by a totally asymmetric zero-range process with u(k) = 1 + 4/k, density
# 1.5, a snapshot every 2 hours) and needs the `xarray` extra
# (`pip install 'massarc[xarray]'`). The test suite runs it on a temporary copy
# (tests/test_docs_examples.py).

# %%
import shutil
from pathlib import Path

import numpy as np

import massarc
from massarc.schema.laws import canonical_site_law, largest_mass_cdf

SAMPLE = Path("samples/depot-ring.zarr")
RUN = Path("build/notebook/depot-ring.zarr")  # summarize writes into a run: use a copy
shutil.rmtree(RUN, ignore_errors=True)
shutil.copytree(SAMPLE, RUN)

run = massarc.open_run(RUN)
run  # noqa: B018 (in Jupyter: a table of the model, lattice, extent and write state)

# %% [markdown]
# ## The run as labelled arrays
#
# `to_xarray()` decodes nothing yet: `mass` is a Dask array with one block per chunk, read
# through massarc's reader (checksums verified, decoding bounded). The metadata are the
# attributes.

# %%
tree = run.to_xarray()
mass = tree["mass"]  # (replica, time, site)
print(mass.dims, mass.shape, mass.dtype)
print("model:", tree.attrs["model"])
print("time unit:", tree["time"].attrs["units"])

# %% [markdown]
# ## The largest depot over time
#
# The run starts in the steady state, so the largest mass fluctuates around its stationary
# mean. The canonical steady state gives its exact law,
# P(max <= k) = Z_k(N, M) / Z(N, M) (`largest_mass_cdf`), hence its exact mean.

# %%
volume, total = run.sites[0], int(run.meta.run.total_mass)
largest = mass.max(dim="site")  # still lazy: (replica, time)
per_snapshot = largest.mean(dim="replica").compute()
print("largest mass, replica mean, first and last snapshot:", per_snapshot.values[[0, -1]])
cdf = np.array([largest_mass_cdf(run.meta.model, volume, total, k) for k in range(total + 1)])
exact_mean = float(np.sum(1.0 - cdf[:-1]))  # E[max] = sum_k P(max > k)
observed_mean = float(largest.mean().compute())
print(f"mean largest mass: observed {observed_mean:.2f}, exact {exact_mean:.2f}")

# %% [markdown]
# ## The occupation of a depot against the exact law
#
# Pooled over sites, snapshots and replicas, the histogram of single-depot masses is the
# exact single-site law of the canonical steady state
# P(m) = f(m) Z(N-1, M-m) / Z(N, M) (`canonical_site_law`).

# %%
counts = np.bincount(mass.values.ravel(), minlength=total + 1)[: total + 1]
observed = counts / counts.sum()
law = canonical_site_law(run.meta.model, volume, total)
distance = 0.5 * float(np.abs(observed - law).sum())  # total variation distance
for m in range(5):
    print(f"P(m = {m}): observed {observed[m]:.4f}, exact {law[m]:.4f}")
print(f"total variation distance: {distance:.4f}")

# %% [markdown]
# ## Audit, summaries, report
#
# The audit reads every chunk once; in Jupyter the report shows as a table. The stored
# summaries then come back as the `summaries` child of the tree.

# %%
report = massarc.audit([RUN])
print("audit:", report.status, {c.id: c.status for c in report.runs[0].checks})
report  # noqa: B018 (in Jupyter: one row per check, its message and where it points)

# %%
massarc.summarize(RUN)
summaries = massarc.open_run(RUN).to_xarray()["summaries"]
print("stored summaries:", sorted(summaries.data_vars))
print("condensate (stored):", summaries.attrs["condensate"]["mass"], "units above the fluid")
