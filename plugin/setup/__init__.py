"""Setting up a what-if: boundary conditions per surface group, materials and sources per
region, initial temperature, time settings and probes; the forms <-> case dict mapping."""
