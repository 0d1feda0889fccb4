"""User workflows: the ``tiltfe`` command, result files, the PDF report and campaigns.

The only layer that prints, writes files or imports matplotlib, dask and pyarrow.
"""
