"""Sample data shipped with reval: the fictional municipality of Vellmarsh."""
