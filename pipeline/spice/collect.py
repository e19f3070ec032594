"""Collecting ``.subckt`` bodies, ``.model``, ``.param`` and ``.global`` lines from the spliced netlist."""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from ..errors import DesignError
from .lines import Line, Reader
from .tokens import debracket, is_kv, nodes_and_params, split_tokens

@dataclass
class Subckt:
    name: str
    ports: tuple[str, ...]
    params: dict[str, tuple[str, str, int]]
    body: list[Line]
    file: str
    line: int


@dataclass
class Model:
    name: str
    type: str
    file: str
    line: int


@dataclass
class Netlist:
    subckts: dict[str, Subckt] = field(default_factory=dict)
    models: dict[str, Model] = field(default_factory=dict)
    params: dict[str, tuple[str, str, int]] = field(default_factory=dict)
    globals_: set[str] = field(default_factory=set)
    top: list[Line] = field(default_factory=list)


def collect(lines: list[Line], rd: Reader) -> Netlist:
    nl = Netlist()
    stack: list[Subckt] = []
    for ln in lines:
        head = ln.text.split()[0].lower()
        if head == ".subckt":
            toks = split_tokens(ln.text)
            if len(toks) < 2:
                raise DesignError(ln.file, ".subckt needs a name", line=ln.line)
            name = toks[1]
            ports, params = nodes_and_params(toks[2:], ln, prefix="",
                                              after=lambda t: f"port '{t}' after the parameters of .subckt {name}")
            if name.lower() in nl.subckts:
                other = nl.subckts[name.lower()]
                raise DesignError(ln.file, f"subcircuit '{name}' is defined twice (first at {other.file}:{other.line})",
                                  line=ln.line)
            lower_ports = [p.lower() for p in ports]
            if len(set(lower_ports)) != len(lower_ports):
                raise DesignError(ln.file, f".subckt {name} names a port twice", line=ln.line)
            sub = Subckt(name, tuple(ports), params, [], ln.file, ln.line)
            nl.subckts[name.lower()] = sub
            stack.append(sub)
            continue
        if head == ".ends":
            if not stack:
                raise DesignError(ln.file, ".ends without a .subckt before it", line=ln.line)
            words = ln.text.split()
            if len(words) > 1 and words[1].lower() != stack[-1].name.lower():
                raise DesignError(ln.file, f".ends {words[1]} closes .subckt {stack[-1].name}", line=ln.line)
            stack.pop()
            continue
        if head == ".model":
            toks = split_tokens(debracket(ln.text))
            if len(toks) < 3:
                raise DesignError(ln.file, ".model needs a name and a type, e.g. .model Q1MOD NPN", line=ln.line)
            name, mtype = toks[1], toks[2].split("(")[0]
            nl.models[name.lower()] = Model(name, mtype.lower(), ln.file, ln.line)
            continue
        if head == ".global":
            nl.globals_.update(w.lower() for w in ln.text.split()[1:])
            continue
        if head == ".title":
            rd.dot_title = ln.text.split(None, 1)[1].strip() if len(ln.text.split()) > 1 else ""
            continue
        if stack:
            stack[-1].body.append(ln)
            continue
        if head in (".param", ".params"):
            read_params(ln, nl.params)
            continue
        nl.top.append(ln)
    if stack:
        raise DesignError(stack[-1].file, f".subckt {stack[-1].name} has no .ends", line=stack[-1].line)
    return nl


def read_params(ln: Line, into: dict[str, tuple[str, str, int]]) -> None:
    toks = split_tokens(ln.text)[1:]
    if not toks:
        raise DesignError(ln.file, ".param needs name=value", line=ln.line)
    for t in toks:
        if not is_kv(t):
            raise DesignError(ln.file, f".param: '{t}' is not name=value", line=ln.line)
        k, v = t.split("=", 1)
        if not re.match(r"^[A-Za-z_][\w.]*$", k) or not v:
            raise DesignError(ln.file, f".param: cannot read '{t}'", line=ln.line)
        into[k.lower()] = (v, ln.file, ln.line)
