"""Elaboration: element lines to board-part candidates, flattening subcircuit instances."""

from __future__ import annotations


from ..errors import DesignError, ValueTextError, limit_hint
from ..graph import SPICE_GROUND_NET, SPICE_GROUND_NODES
from .numbers import NUM_RE, PLAIN_NUM, number_warning, parse_number
from .expr import ExprError, Scope, evaluate, strip_braces
from .limits import SUBCKT_DEPTH
from .lines import Line
from .tokens import REF_RE, is_kv, nodes_and_params, split_tokens
from .collect import Subckt, read_params
from .state import Build, Ctx, global_scope
from .mapping import DEFAULTS, LETTER_TYPES, POLARITY_KINDS, add_candidate, map_pins, resolve



_SOURCES = {"v": "voltage source", "i": "current source", "b": "behavioural source",
            "e": "voltage-controlled voltage source", "f": "current-controlled current source",
            "g": "voltage-controlled current source", "h": "current-controlled voltage source"}


_OTHER_ELEMENTS = {"k": "inductor coupling", "s": "voltage-controlled switch", "w": "current-controlled switch",
                   "t": "transmission line", "o": "lossy transmission line", "u": "distributed RC line",
                   "y": "transmission line", "a": "code-model element", "n": "device-model element",
                   "p": "coupled transmission line", "z": "MESFET"}


_ANALYSIS = frozenset({
    "op", "ac", "dc", "tran", "noise", "tf", "sens", "disto", "pz", "sp", "four", "fourier", "meas",
    "measure", "save", "print", "plot", "probe", "options", "option", "opt", "temp", "ic", "nodeset",
    "width", "csparam", "func", "step", "data", "alter", "pss", "hb", "checkpoint", "endl",
})




def net_key(b: Build, ctx: Ctx, node: str, ln: Line) -> str:
    if node[:1] in "{'\"" or "=" in node:
        raise DesignError(ln.file, f"'{node}' is not a node name", line=ln.line)
    low = node.lower()
    if low in SPICE_GROUND_NODES:
        b.net_names.setdefault("0", SPICE_GROUND_NET)
        b.net_lines.setdefault("0", ln.line)
        return "0"
    if low in ctx.ports:
        return ctx.ports[low]
    if not ctx.path or low in b.nl.globals_:
        key, shown, origin = low, node, ""
    else:
        key = ".".join(p.lower() for p in ctx.path) + "." + low
        shown = ".".join(ctx.path) + "." + node
        origin = ".".join(ctx.path)
    prev = b.net_origin.get(key)
    if prev is None:
        b.net_origin[key] = (ln.file, ln.line, origin)
        b.net_names[key] = shown
        b.net_lines[key] = ln.line
    elif prev[2] != origin:
        inside = origin or prev[2]
        raise DesignError(ln.file, f"node '{shown}' is both a node of the top level and an inside node of "
                          f"{inside} (first at {prev[0]}:{prev[1]}); rename one of them", line=ln.line)
    return key


def _value_of(token: str, ctx: Ctx, ln: Line, b: Build, name: str, letter: str) -> tuple[float, str]:
    t = token.strip()
    if t[:1] in "{'":
        try:
            return _evaluate_at(t, ctx, b), t
        except ExprError as exc:
            raise _expr_error(exc, ln, name) from None
    if t[:1] == '"':
        t = t[1:-1]
    try:
        v = parse_number(t)
    except ValueTextError:
        try:
            ctx.scope.get(t)
            hint = f"; write {{{t}}} to use the parameter"
        except ExprError:
            hint = ""
        raise DesignError(ln.file, f"{name}: value '{token}' is not a number{hint}", line=ln.line) from None
    warn = number_warning(t, letter)
    if warn:
        b.rd.note("warning", "spice.number", (name,), f"{ln.file}:{ln.line}: {name}: {warn}.")
    return v, t


def _expr_error(exc: ExprError, ln: Line, name: str) -> DesignError:
    """Locate an expression's fault: at its ``.param`` line when it lies there, else at ``ln``."""
    if exc.where is not None:
        return DesignError(exc.where[0], exc.reason, line=exc.where[1])
    return DesignError(ln.file, f"{name}: {exc.reason}", line=ln.line)


def _evaluate_at(text: str, ctx: Ctx, b: Build) -> float:
    """Evaluate ``{...}`` / ``'...'`` text in ``ctx``'s scope, within the expression-depth limit."""
    return evaluate(strip_braces(text), ctx.scope.get, depth=b.rd.limits.expression_depth)


def _board_ref(ctx: Ctx, name: str) -> str:
    return "_".join((*ctx.path, name))


def elaborate(lines: list[Line], ctx: Ctx, b: Build) -> None:
    """Turn element lines into candidates in ``b``, flattening unmapped ``X`` instances into ``ctx``.

    Every element line elaborated counts towards ``limits.expansion_parts``,
    as the flattening grows: a subcircuit of ten instances of a subcircuit
    of ten instances ... is stopped at the limit, not after it has filled
    memory.
    """
    for ln in lines:
        head = ln.text.split()[0]
        low = head.lower()
        if low.startswith("."):
            _directive(ln, low, ctx, b)
            continue
        b.expanded += 1
        if b.expanded > b.rd.limits.expansion_parts:
            raise DesignError(ln.file, f"the flattened netlist has more than {b.rd.limits.expansion_parts} element "
                              f"lines (subcircuit instances expanded); {limit_hint('spice_expansion_parts')}",
                              line=ln.line)
        letter = low[0]
        if not letter.isalpha():
            raise DesignError(ln.file, f"cannot read the line '{ln.text[:40]}': an element name starts with a letter",
                              line=ln.line)
        spice_name = ".".join((*ctx.path, head))
        key = spice_name.lower()
        if key in b.elements:
            f, l = b.elements[key]
            raise DesignError(ln.file, f"element {head} is defined twice (first at {f}:{l}; names are not "
                              f"case-sensitive in SPICE)", line=ln.line)
        b.elements[key] = (ln.file, ln.line)
        if letter in _SOURCES:
            _source(ln, letter, ctx, b, spice_name)
            continue
        if letter in _OTHER_ELEMENTS:
            sev = "info" if letter == "k" else "warning"
            b.rd.note(sev, "spice.not-a-part", (spice_name,),
                      f"{ln.file}:{ln.line}: {spice_name} is a {_OTHER_ELEMENTS[letter]}, which snugboard does not "
                      f"place on the board; left out.")
            continue
        if letter in "rcl":
            _passive(ln, letter, ctx, b, spice_name)
        elif letter in "dqmj":
            _semiconductor(ln, letter, ctx, b, spice_name)
        elif letter == "x":
            _instance(ln, ctx, b, spice_name)
        else:
            raise DesignError(ln.file, f"unknown element letter '{head[0]}' in '{head}'", line=ln.line)


def _directive(ln: Line, low: str, ctx: Ctx, b: Build) -> None:
    name = low[1:]
    if low in (".param", ".params"):  # inside a subcircuit body: read before its elements
        return
    if name in _ANALYSIS:
        b.rd.note("info", "spice.not-a-part", (ln.file,),
                  f"{ln.file}:{ln.line}: {low} is a simulator directive, not a board part; left out.")
        return
    b.rd.note("warning", "spice.unknown-directive", (ln.file,),
              f"{ln.file}:{ln.line}: snugboard does not know the directive {low}; it was left out.")


def _source(ln: Line, letter: str, ctx: Ctx, b: Build, spice_name: str) -> None:
    b.rd.note("info", "spice.not-a-part", (spice_name,),
              f"{ln.file}:{ln.line}: {spice_name} is a {_SOURCES[letter]}, not a board part; left out.")
    if letter != "v":
        return
    toks = split_tokens(ln.text, drop_brackets=True)
    if len(toks) < 4:
        return
    rest = [t.lower() for t in toks[3:]]
    if any(w in rest for w in ("ac", "pulse", "sin", "exp", "pwl", "sffm", "am", "trnoise", "trrandom", "distof1",
                               "distof2", "external")):
        return
    vals = [t for t in toks[3:] if t.lower() != "dc"]
    if len(vals) != 1:
        return
    try:
        v = _evaluate_at(vals[0], ctx, b) if vals[0][:1] in "{'" else parse_number(vals[0])
    except (ValueTextError, ExprError):
        return
    if v == 0:
        return
    try:
        n1, n2 = net_key(b, ctx, toks[1], ln), net_key(b, ctx, toks[2], ln)
    except DesignError:
        return
    if n2 == "0" and n1 != "0":
        b.sources.append((spice_name, n1, "+", v, ln))
    elif n1 == "0" and n2 != "0":
        b.sources.append((spice_name, n2, "-", -v, ln))


def _passive(ln: Line, letter: str, ctx: Ctx, b: Build, spice_name: str) -> None:
    toks = split_tokens(ln.text, drop_brackets=True)
    name = toks[0]
    if len(toks) < 3:
        raise DesignError(ln.file, f"{name}: needs two nodes and a value, e.g. {name} in out 10k", line=ln.line)
    n1, n2 = net_key(b, ctx, toks[1], ln), net_key(b, ctx, toks[2], ln)
    value_tok = None
    model = ""
    keywords = {"r": ("r", "resistance"), "c": ("c", "capacitance"), "l": ("l", "inductance")}[letter]
    for t in toks[3:]:
        if is_kv(t):
            k, v = t.split("=", 1)
            if k.lower() in keywords and value_tok is None:
                value_tok = v
            continue
        if value_tok is None and (t[:1] in "{'\"" or NUM_RE.match(t)):
            value_tok = t
        elif not model and not NUM_RE.match(t):
            model = t
    if value_tok is None:
        raise DesignError(ln.file, f"{name}: no value (write e.g. {name} {toks[1]} {toks[2]} 10k)", line=ln.line)
    value, text = _value_of(value_tok, ctx, ln, b, name, letter)
    if value < 0 or (value == 0 and letter != "r"):
        raise DesignError(ln.file, f"{name}: value {value_tok} is {'negative' if value < 0 else 'zero'}; a board "
                          f"part needs a positive value", line=ln.line)
    ref = _board_ref(ctx, name)
    kind, package, pins, new_ref, rspec, cspec = resolve(
        b, ln, letter, spice_name, ref, model, "", (DEFAULTS[letter][0],))
    assert kind is not None
    mapped = map_pins(b, ln, spice_name, letter, kind, package, 2, pins)
    add_candidate(b, ln, letter, spice_name, ref, [n1, n2], kind, package, mapped, new_ref, rspec, cspec,
         value if kind.value_unit else None, text, model)


def _semiconductor(ln: Line, letter: str, ctx: Ctx, b: Build, spice_name: str) -> None:
    toks = [t for t in split_tokens(ln.text, drop_brackets=True)]
    name = toks[0]
    plain = [t for t in toks[1:] if not is_kv(t)]
    n_nodes = {"d": 2, "q": 3, "m": 4, "j": 3}[letter]
    models = b.nl.models

    def is_model(t: str) -> bool:
        return t.lower() in models or t.lower() in POLARITY_KINDS

    # Q may have a substrate node, M may lack the bulk node (3-terminal models).
    if letter == "q" and len(plain) >= 5 and not is_model(plain[3]) and not PLAIN_NUM.match(plain[4]):
        n_nodes = 4
    if letter == "m" and len(plain) >= 4 and is_model(plain[3]):
        n_nodes = 3
    if len(plain) < n_nodes + 1:
        need = {"d": "anode cathode model", "q": "collector base emitter model",
                "m": "drain gate source bulk model", "j": "drain gate source model"}[letter]
        raise DesignError(ln.file, f"{name}: expected {name} {need}", line=ln.line)
    node_toks = plain[:n_nodes]
    model = plain[n_nodes]
    if PLAIN_NUM.match(model) or model[:1] in "{'\"":
        raise DesignError(ln.file, f"{name}: '{model}' is not a model name", line=ln.line)
    nodes = [net_key(b, ctx, t, ln) for t in node_toks]
    if letter == "q" and n_nodes == 4:
        nodes = nodes[:3]  # substrate: not a pin of a discrete transistor
    if letter == "m" and n_nodes == 4:
        if nodes[3] != nodes[2]:
            b.rd.note("warning", "spice.mos-bulk", (spice_name,),
                      f"{ln.file}:{ln.line}: {spice_name}: bulk is on {b.net_names.get(nodes[3], nodes[3])} but source "
                      f"on {b.net_names.get(nodes[2], nodes[2])}; a discrete MOSFET ties bulk to source inside, so the "
                      f"board part has no bulk pin.")
        nodes = nodes[:3]
    mtype = model.lower() if model.lower() in POLARITY_KINDS else (models[model.lower()].type if model.lower() in models else "")
    auto: tuple[str, ...] = ()
    if letter == "d":
        auto = (DEFAULTS["d"][0],)
    elif mtype in POLARITY_KINDS and mtype in LETTER_TYPES[letter]:
        auto = POLARITY_KINDS[mtype]
    elif mtype == "vdmos":
        auto = ("nmos",)
    ref = _board_ref(ctx, name)
    kind, package, pins, new_ref, rspec, cspec = resolve(b, ln, letter, spice_name, ref, model, "", auto)
    if kind is None:
        known = f"model {model} is of type {mtype.upper()}" if mtype else f"model {model} is not defined here"
        want = "/".join(t.upper() for t in LETTER_TYPES[letter])
        raise DesignError(ln.file, f"{spice_name}: cannot tell which part this is ({known}; expected {want}); "
                          f"add a .model line or name its kind in the parts map", line=ln.line)
    mapped = map_pins(b, ln, spice_name, letter, kind, package, len(nodes), pins)
    add_candidate(b, ln, letter, spice_name, ref, nodes, kind, package, mapped, new_ref, rspec, cspec, model=model)


def _instance(ln: Line, ctx: Ctx, b: Build, spice_name: str) -> None:
    toks = split_tokens(ln.text, drop_brackets=True)
    name = toks[0]
    plain, overrides = nodes_and_params(toks[1:], ln, prefix=f"{name}: ",
                                         after=lambda t: f"{name}: '{t}' after the parameters")
    if len(plain) < 1:
        raise DesignError(ln.file, f"{name}: expected {name} nodes... SUBCIRCUIT", line=ln.line)
    subname = plain[-1]
    node_toks = plain[:-1]
    sub = b.nl.subckts.get(subname.lower())
    base = name[1:] if REF_RE.match(name[1:] or "-") else name
    ref = _board_ref(ctx, base)
    kind, package, pins, new_ref, rspec, cspec = resolve(b, ln, "x", spice_name, ref, "", subname, ())
    if kind is not None:
        nodes = [net_key(b, ctx, t, ln) for t in node_toks]
        ports = sub.ports if sub is not None else ()
        mapped = map_pins(b, ln, spice_name, "x", kind, package, len(nodes), pins, ports)
        if sub is not None and len(sub.ports) != len(nodes):
            raise DesignError(ln.file, f"{name}: subcircuit {sub.name} has {len(sub.ports)} ports but the line gives "
                              f"{len(nodes)} nodes", line=ln.line)
        add_candidate(b, ln, "x", spice_name, ref, nodes, kind, package, mapped, new_ref, rspec, cspec)
        return
    if sub is None:
        raise DesignError(ln.file, f"{name}: subcircuit '{subname}' is not defined (include its file) and the parts "
                          f"map does not name it ([subckt.{subname}] kind = ..., package = ...)", line=ln.line)
    if len(sub.ports) != len(node_toks):
        raise DesignError(ln.file, f"{name}: subcircuit {sub.name} has {len(sub.ports)} ports but the line gives "
                          f"{len(node_toks)} nodes", line=ln.line)
    if sub.name.lower() in ctx.stack:
        raise DesignError(ln.file, f"{name}: subcircuit {sub.name} calls itself", line=ln.line)
    if len(ctx.stack) >= SUBCKT_DEPTH:
        raise DesignError(ln.file, f"{name}: subcircuits nest deeper than {SUBCKT_DEPTH} levels", line=ln.line)
    if not REF_RE.match(name):
        raise DesignError(ln.file, f"{name}: '{name}' cannot start a board reference (a letter, then letters, "
                          f"digits or _)", line=ln.line)
    _flatten(ln, ctx, b, name, sub, node_toks, overrides)


def _flatten(ln: Line, ctx: Ctx, b: Build, name: str, sub: Subckt, node_toks: list[str],
             overrides: dict[str, tuple[str, str, int]]) -> None:
    """Elaborate ``sub``'s body as instance ``name``: its ports on the caller's nets, its own scope."""
    ports = {p.lower(): net_key(b, ctx, t, ln) for p, t in zip(sub.ports, node_toks)}
    # Parameters: the subcircuit's defaults (global scope) overridden by the
    # instance's values (evaluated where the instance stands).
    values: dict[str, tuple[str, str, int]] = {}
    for k, (v, f, l) in sub.params.items():
        values[k] = (v, f, l)
    for k, (v, f, l) in overrides.items():
        if k not in sub.params:
            raise DesignError(ln.file, f"{name}: subcircuit {sub.name} has no parameter '{k}'", line=ln.line)
        try:
            val = _evaluate_at(v, ctx, b)
        except ExprError as exc:
            raise _expr_error(exc, ln, name) from None
        values[k] = (repr(val), f, l)
    depth = b.rd.limits.expression_depth
    scope = Scope(values, parent=global_scope(b), depth=depth)
    local: dict[str, tuple[str, str, int]] = {}
    for body_line in sub.body:
        if body_line.text.split()[0].lower() in (".param", ".params"):
            read_params(body_line, local)
    inner = Ctx(path=(*ctx.path, name), ports=ports, scope=Scope(local, parent=scope, depth=depth),
                 stack=(*ctx.stack, sub.name.lower()))
    elaborate(sub.body, inner, b)
