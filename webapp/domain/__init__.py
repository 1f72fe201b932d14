"""The rules of the trade, pure: no Flask, no SQL, no file or network I/O.

Everything here takes plain values and returns plain values (dataclasses,
pydantic models, numbers). The station's web rooms and its store call in;
nothing here calls out. A test keeps flask and sqlite_utils out of this folder.
"""
