"""The value roll: values, land, review, decisions on batches, export."""
