"""Byte encodings of a text file as a careless editor or another system might save it.

Shared by the fuzz tests of the stock CSV and of the TOML files.
"""


def encode_as(text: str, how: str, latin1_line: str) -> bytes:
    """``text`` as bytes: ``"bom"`` (UTF-8 with a byte-order mark), ``"latin1"`` (with
    ``latin1_line`` appended, which holds a character outside ASCII), ``"utf16"``, or
    anything else as plain UTF-8 (lone surrogates kept)."""
    if how == "bom":
        return b"\xef\xbb\xbf" + text.encode("utf-8")
    if how == "latin1":
        return (text + latin1_line).encode("latin-1", errors="replace")
    if how == "utf16":
        return text.encode("utf-16")
    return text.encode("utf-8", errors="surrogatepass")
