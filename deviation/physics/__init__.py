"""The pure numerical core: numpy and scipy in, arrays and floats out; no files, no UI, no pydantic.

- ``heating/``: cold-spot step responses and their superposition over a retort record.
- ``lethality``: lethal rate and the General Method.
- ``spoilage``: survivors, nonsterile probability, log reductions.
- ``uncertainty``: the Monte Carlo batch over heat-penetration parameters.
- ``calibration``: fh, jh, fc, jc from heat-penetration data (Ball's semi-log method, least squares).
- ``ball_formula``: Ball's formula method, the hand cross-check of a filed process.
- ``continuous``: continuous systems, the F of every container entry through the shell.
"""
