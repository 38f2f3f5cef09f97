"""A UNO type library (``.rdb``) holding one interface, written without the LibreOffice SDK.

LibreOffice learns the argument and result types of an add-in's functions from
an interface in a type library. The binary "UNOIDL" format is small and
specified in LibreOffice's source (``unoidl/README.md``): an 8-byte magic,
the offset and size of the root map, then entities; every integer is
little-endian and every offset counts from the start of the file. This module
writes only what an add-in needs: modules (maps, sorted by name, since
LibreOffice looks names up by binary search) and one published interface whose
methods take ``in`` parameters and raise nothing.
"""
from __future__ import annotations

import struct
from dataclasses import dataclass

__all__ = ["Method", "type_library", "read_interface"]

MAGIC = b"UNOIDL\xff\x00"
_HEADER_SIZE = len(MAGIC) + 8
_MODULE = 0
_INTERFACE = 5
_PUBLISHED = 0x80
_BASE_INTERFACE = "com.sun.star.uno.XInterface"


@dataclass(frozen=True)
class Method:
    """One interface method: its name, its result type and its (name, type) parameters."""

    name: str
    result: str
    parameters: tuple


def _u32(value: int) -> bytes:
    return struct.pack("<I", value)


def _string(text: str) -> bytes:
    """A Len-String: the length (high bit clear), then the ASCII bytes."""
    data = text.encode("ascii")
    if len(data) >= 0x80000000:
        raise ValueError("name too long for a type library")
    return _u32(len(data)) + data


def _interface_payload(methods) -> bytes:
    payload = bytearray([_PUBLISHED | _INTERFACE])
    payload += _u32(1) + _string(_BASE_INTERFACE)  # mandatory bases
    payload += _u32(0)  # optional bases
    payload += _u32(0)  # attributes
    payload += _u32(len(methods))
    for method in methods:
        payload += _string(method.name) + _string(method.result) + _u32(len(method.parameters))
        for name, type_name in method.parameters:
            payload += b"\x00" + _string(name) + _string(type_name)  # direction "in"
        payload += _u32(0)  # exceptions
    return bytes(payload)


def type_library(interface: str, methods) -> bytes:
    """The bytes of an ``.rdb`` declaring ``interface`` (a dotted name) with ``methods``."""
    *modules, leaf = interface.split(".")
    if not modules:
        raise ValueError("the interface needs a module, e.g. 'tailstop.XFormulas'")
    file = bytearray(MAGIC + b"\x00" * 8)

    def put(data: bytes) -> int:
        offset = len(file)
        file.extend(data)
        return offset

    # Written depth first, innermost entity first, so every offset points backwards.
    entry_name, entry_payload = put(leaf.encode("ascii") + b"\x00"), put(_interface_payload(methods))
    for module in reversed(modules):
        module_payload = put(bytes([_MODULE]) + _u32(1) + _u32(entry_name) + _u32(entry_payload))
        entry_name, entry_payload = put(module.encode("ascii") + b"\x00"), module_payload
    root = put(_u32(entry_name) + _u32(entry_payload))
    file[len(MAGIC):_HEADER_SIZE] = _u32(root) + _u32(1)
    return bytes(file)


def read_interface(data: bytes):
    """(dotted interface name, [Method]) from a library written by ``type_library``.

    A reader of exactly the subset written here, so that a test can check the
    bytes against the specs without LibreOffice.
    """
    if data[:len(MAGIC)] != MAGIC:
        raise ValueError("not a UNOIDL type library")
    root, count = struct.unpack_from("<II", data, len(MAGIC))
    names = []
    entries = [struct.unpack_from("<II", data, root + 8 * i) for i in range(count)]
    while len(entries) == 1:
        name_at, payload_at = entries[0]
        names.append(data[name_at:data.index(b"\x00", name_at)].decode("ascii"))
        kind = data[payload_at]
        if kind == _MODULE:
            size = struct.unpack_from("<I", data, payload_at + 1)[0]
            entries = [struct.unpack_from("<II", data, payload_at + 5 + 8 * i) for i in range(size)]
            continue
        if kind & 0x1F != _INTERFACE:
            raise ValueError(f"unexpected entity kind {kind}")
        return ".".join(names), _read_methods(data, payload_at + 1)
    raise ValueError("expected exactly one entity per module")


def _read_methods(data, at):
    def read_u32():
        nonlocal at
        value = struct.unpack_from("<I", data, at)[0]
        at += 4
        return value

    def read_string():
        nonlocal at
        size = read_u32()
        text = data[at:at + size].decode("ascii")
        at += size
        return text

    bases = [read_string() for _ in range(read_u32())]
    if bases != [_BASE_INTERFACE] or read_u32() or read_u32():
        raise ValueError("unexpected bases or attributes")
    methods = []
    for _ in range(read_u32()):
        name, result = read_string(), read_string()
        parameters = []
        for _ in range(read_u32()):
            at += 1
            parameters.append((read_string(), read_string()))
        if read_u32():
            raise ValueError("unexpected exceptions")
        methods.append(Method(name, result, tuple(parameters)))
    return methods
