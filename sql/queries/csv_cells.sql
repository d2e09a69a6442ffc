-- How reval writes cells into a CSV a spreadsheet may open (the export, the check's rows): a text cell starting
-- with = + - @, a tab or a carriage return gets a leading single quote so a spreadsheet evaluates nothing, and
-- so does one starting with a single quote, so that removing one leading quote always gives back the stored
-- text. Number cells are written by printf and cannot start with anything but a digit or a minus sign.
CREATE OR REPLACE TEMP MACRO export_text(x) AS
    CASE WHEN regexp_matches(x, '^[=+\-@\t\r'']') THEN '''' || x ELSE x END;
CREATE OR REPLACE TEMP MACRO export_number(x) AS printf('%.2f', round(x, 2) + 0.0);
