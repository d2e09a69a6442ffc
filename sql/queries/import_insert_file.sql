-- One input file of an import (see import_temp_tables.sql): file key, holds parcels, holds sales.
INSERT INTO import_files VALUES ($1, $2, $3);
