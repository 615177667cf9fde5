"""The format names the readers know, and how messages call them."""

from __future__ import annotations

FORMATS = ("csv", "tsv", "stata", "spss", "sas", "excel", "parquet", "rds", "rdata")
"""The format names that :func:`detect_format` returns."""

FORMAT_LABELS = {
    "csv": "CSV text",
    "tsv": "tab-separated text",
    "stata": "a Stata file (.dta)",
    "spss": "an SPSS file (.sav)",
    "sas": "a SAS data file (.sas7bdat)",
    "excel": "an Excel workbook (.xlsx)",
    "parquet": "a Parquet file",
    "rds": "an R data file (.rds)",
    "rdata": "an R workspace file (.RData)",
}
"""How each format is named in messages."""

SUPPORTED = (
    "CSV or TSV text, Stata .dta, SPSS .sav/.zsav, SAS .sas7bdat, Excel .xlsx, "
    "Parquet, and R .rds/.RData"
)
