"""The LaTeX record (pylatex: amsmath for aligned equations, siunitx for quantities) and the
PDF made from it with TeX Live (``latexmk``, or ``pdflatex`` run twice).

User text is escaped by pylatex (``escape_latex``) and restricted to characters the fonts
have, so a title can never become a TeX command; TeX runs without shell escape and may open
and write files only in its working folder.
"""
from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile

from pylatex import Command, Document, Package, Section, Subsection, Tabular
from pylatex.utils import NoEscape, escape_latex

from derive.errors import DeriveError
from derive.export import plots
from derive.export.files import write_atomic
from derive.export.view import view

INSTALL_HINT = ("PDF records need TeX Live: install latexmk and pdflatex with siunitx "
                "(Debian/Ubuntu: apt-get install texlive-latex-recommended "
                "texlive-latex-extra texlive-science latexmk)")

_TEXT_CHARS = {"Ω": r"\ensuremath{\Omega}", "µ": r"\ensuremath{\mu}", "μ": r"\ensuremath{\mu}",
               "±": r"\ensuremath{\pm}", "∥": r"\ensuremath{\parallel}", "·": r"\ensuremath{\cdot}",
               "—": "---", "–": "--", "°": r"\textdegree{}", "≈": r"\ensuremath{\approx}",
               "×": r"\ensuremath{\times}", "≤": r"\ensuremath{\le}", "≥": r"\ensuremath{\ge}",
               "Σ": r"\ensuremath{\Sigma}", "→": r"\ensuremath{\to}", "∞": r"\ensuremath{\infty}",
               "−": r"\ensuremath{-}", "∓": r"\ensuremath{\mp}", "≠": r"\ensuremath{\ne}",
               "√": r"\ensuremath{\surd}", "∂": r"\ensuremath{\partial}",
               "′": r"\ensuremath{'}",
               "…": r"\ldots{}", "‰": r"\textperthousand{}", "€": r"\texteuro{}",
               "“": "``", "”": "''", "‘": "`", "’": "'", "\u2009": r"\,", "\u00a0": "~",
               "∠": r"\ensuremath{\angle}", "∑": r"\ensuremath{\sum}",
               "⋅": r"\ensuremath{\cdot}", "Ω": r"\ensuremath{\Omega}",
               "≫": r"\ensuremath{\gg}", "≪": r"\ensuremath{\ll}", "²": r"\ensuremath{^2}",
               "³": r"\ensuremath{^3}"}


def _math_chars(math: str) -> str:
    """Unicode symbols inside a math string (unit words in ``\\text{}``, such as kΩ) as
    commands the fonts have; ASCII is left as it is."""
    return "".join(_TEXT_CHARS.get(ch, ch) if ord(ch) > 127 and
                   _TEXT_CHARS.get(ch, "").startswith("\\ensuremath") else ch for ch in math)


# Greek letters (both the Greek block's µ and Ω are covered above): the math italic of the
# Computer/Latin Modern fonts; capitals that look like Latin letters are upright Latin.
_GREEK = ("alpha beta gamma delta epsilon zeta eta theta iota kappa lambda mu nu xi o pi rho "
          "varsigma sigma tau upsilon phi chi psi omega").split()
for _i, _n in enumerate(_GREEK):
    _TEXT_CHARS.setdefault(chr(0x3B1 + _i), r"\ensuremath{\%s}" % _n if _n != "o" else "o")
_CAPS = "A B Gamma Delta E Z H Theta I K Lambda M N Xi O Pi P - Sigma T Upsilon Phi X Psi Omega"
for _i, _n in enumerate(_CAPS.split()):
    if _n != "-":
        _TEXT_CHARS.setdefault(chr(0x391 + _i), r"\ensuremath{\%s}" % _n if len(_n) > 1
                               else r"\ensuremath{\mathrm{%s}}" % _n)

_PREFIX = {"f": r"\femto", "p": r"\pico", "n": r"\nano", "µ": r"\micro", "m": r"\milli",
           "": "", "k": r"\kilo", "M": r"\mega", "G": r"\giga", "T": r"\tera"}
_UNIT = {"Ω": r"\ohm", "V": r"\volt", "A": r"\ampere", "S": r"\siemens", "F": r"\farad",
         "H": r"\henry", "Hz": r"\hertz", "V/V": r"\volt\per\volt", "A/A": r"\ampere\per\ampere"}


def text(t) -> NoEscape:
    """User or generated text as literal LaTeX text.

    >>> str(text(r"\\input{x} 50% & $"))
    '\\\\textbackslash{}input\\\\{x\\\\} 50\\\\% \\\\& \\\\$'
    """
    out = []
    for ch in str(t):
        if ch in _TEXT_CHARS:
            out.append(_TEXT_CHARS[ch])
        elif ch in "\r\n\t":
            out.append(" ")
        elif ord(ch) < 32 or 127 <= ord(ch) < 160 or ord(ch) > 255:   # C0, DEL, C1
            out.append("?")
        else:
            out.append(escape_latex(ch))
    return NoEscape("".join(out))


def si_value(shown: str) -> NoEscape:
    """An engineering-notation value (``'4.70 kΩ'``) as ``\\SI{4.70}{\\kilo\\ohm}``."""
    m = re.match(r"^(-?[0-9.]+(?:e[+-]?\d+)?) ?([fpnµmkMGT]?)(Ω|V/V|A/A|V|A|S|F|Hz|H)?$",
                 shown)
    if not m:
        return text(shown)
    num, pre, unit = m.groups()
    if unit is None:
        return NoEscape(r"\num{%s%s}" % (num, {"": "", "k": "e3", "M": "e6", "G": "e9",
                                               "T": "e12", "m": "e-3", "µ": "e-6",
                                               "n": "e-9", "p": "e-12", "f": "e-15"}[pre]))
    if unit in ("V/V", "A/A") and pre:
        return NoEscape(r"\SI{%s}{%s%s}" % (num, _PREFIX[pre], _UNIT[unit]))
    return NoEscape(r"\SI{%s}{%s%s}" % (num, _PREFIX[pre], _UNIT[unit]))


# A display wider than the line is scaled down to the line width (the printer breaks long
# equations first, so this only catches what is left, e.g. a wide matrix row).
FIT_DISPLAY = (r"\newsavebox\deriveeqbox"
               r"\newcommand{\fitdisplay}[1]{\sbox\deriveeqbox{$\displaystyle #1$}"
               r"\ifdim\wd\deriveeqbox>\linewidth\resizebox{\linewidth}{!}{\usebox\deriveeqbox}"
               r"\else\usebox\deriveeqbox\fi}")


_VALUE_IN_TEXT = re.compile(r"-?[0-9.]+(?:e[+-]?\d+)? ?[fpnµmkMGT]?(?:Ω|V/V|A/A|V|A|S|F|Hz|H)\b")


def _si_text(t: str) -> NoEscape:
    """Generated summary text with its values (``-2.50 mV``) set by siunitx."""
    out, pos = [], 0
    for m in _VALUE_IN_TEXT.finditer(t):
        out.append(text(t[pos:m.start()]))
        out.append(si_value(m.group(0)))
        pos = m.end()
    out.append(text(t[pos:]))
    return NoEscape("".join(out))


def _math_block(doc, lines):
    doc.append(NoEscape("\\[\\fitdisplay{\\begin{aligned}\n" + " \\\\\n".join(lines) +
                        "\n\\end{aligned}}\\]\n"))


def _table(doc, head, rows, spec=None):
    t = Tabular(spec or ("l" * len(head)))
    t.add_hline()
    t.add_row([text(h) for h in head])
    t.add_hline()
    for r in rows:
        t.add_row(r)
    t.add_hline()
    doc.append(NoEscape(r"\begin{center}\small"))
    doc.append(t)
    doc.append(NoEscape(r"\end{center}"))


def document(record, figures_dir=None) -> Document:
    v = view(record)
    doc = Document(documentclass="article", document_options=["a4paper", "11pt"],
                   geometry_options={"margin": "2.2cm"}, lmodern=True, textcomp=True,
                   fontenc="T1", inputenc="utf8", page_numbers=True)
    for p in ("amsmath", "amssymb", "siunitx", "graphicx", "booktabs"):
        doc.packages.append(Package(p))
    doc.preamble.append(NoEscape(r"\sisetup{per-mode=symbol}\input{glyphtounicode}"
                                 r"\pdfgentounicode=1\emergencystretch=3em" "\n" + FIT_DISPLAY))
    doc.preamble.append(Command("title", text(v["title"])))
    doc.preamble.append(Command("date", ""))
    doc.preamble.append(Command("author", "Design calculation record"))
    doc.append(NoEscape(r"\maketitle"))
    for n in v["notes"]:
        doc.append(text(n))
        doc.append(NoEscape("\n\n"))
    for c in v["cautions"]:
        doc.append(NoEscape(r"\noindent\fbox{\parbox{\dimexpr\linewidth-2\fboxsep\relax}{"
                            r"\textbf{Caution.} "))
        doc.append(text(c))
        doc.append(NoEscape("}}\n\n"))
    with doc.create(Section("Results", numbering=False)):
        doc.append(NoEscape(r"\begin{description}\setlength{\itemsep}{1pt}"))
        for r in v["results"]:
            doc.append(NoEscape(r"\item["))
            doc.append(text(r["request"] + (" (see its note)" if r["notes"] else "")))
            doc.append(NoEscape(r"]\mbox{}\\[-\baselineskip]\begin{itemize}\setlength{\itemsep}{0pt}"))
            for it in r["summary"]:
                doc.append(NoEscape(r"\item "))
                if it["label"]:
                    doc.append(text(it["label"] + ": "))
                if it["math"]:
                    doc.append(NoEscape("$" + _math_chars(it["math"]) + "$ "))
                doc.append(_si_text(it["text"]))
            if not r["summary"]:
                doc.append(NoEscape(r"\item "))
                doc.append(text("(see the derivation)"))
            doc.append(NoEscape(r"\end{itemize}"))
        doc.append(NoEscape(r"\end{description}"))
        if v["verification"]:
            doc.append(text(v["verification"]))
    with doc.create(Section("Circuit", numbering=False)):
        rows = [[text(e["name"]), text(e["kind"]), text(e["terminals"]),
                 NoEscape(f"${e['symbol']}$") if e["symbol"] else "",
                 si_value(e["nominal"]) if e["nominal"] else "", text(e["tolerance"])]
                + ([si_value(e["standard"]) if e["standard"] else ""]
                   if v.get("standard_column") else [])
                for e in v["elements"]]
        _table(doc, ["element", "kind", "terminals", "symbol", "nominal", "tolerance"]
               + (["with standard values"] if v.get("standard_column") else []), rows)
        with doc.create(Subsection("Modelling assumptions", numbering=False)):
            doc.append(NoEscape(r"\begin{itemize}"))
            for a in v["assumptions"]:
                doc.append(NoEscape(r"\item "))
                doc.append(text(a))
            doc.append(NoEscape(r"\end{itemize}"))
    if v["closed_forms"]:
        with doc.create(Section("Closed forms", numbering=False)):
            for r in v["results"]:
                for q in r["quantities"]:
                    if q["lines"] and q["long"]:
                        _math_block(doc, q["lines"])
    for i, r in enumerate(v["results"]):
        with doc.create(Section(text(r["request"]), numbering=False)):
            for n in r["notes"]:
                doc.append(NoEscape(r"\noindent\textbf{Note.} "))
                doc.append(text(n))
                doc.append(NoEscape("\n\n"))
            doc.append(NoEscape(r"\begin{enumerate}"))
            for s in r["steps"]:
                doc.append(NoEscape(r"\item "))
                doc.append(text(s["text"]))
                if s["verified"] and s["equations"]:
                    doc.append(NoEscape(r"\ \emph{(verified)}"))
                if s["table"]:
                    _table(doc, s["table"]["head"], [[text(c) for c in row]
                                                     for row in s["table"]["rows"]])
                for eq in s["equations"]:
                    _math_block(doc, eq["lines"])
            doc.append(NoEscape(r"\end{enumerate}"))
            for k, f in enumerate(record.results[i].extra.get("figures") or []):
                if figures_dir is None or not plots.can_draw(f):
                    continue
                path = os.path.join(figures_dir, f"fig{i}_{k}.png")
                plots.draw(f, path, getattr(record, "digits", None) or 4)
                doc.append(NoEscape(r"\begin{figure}[h]\centering\includegraphics[width=0.8"
                                    r"\linewidth]{" + os.path.basename(path) + r"}\caption{"))
                doc.append(text(getattr(f, "caption", "")))
                doc.append(NoEscape(r"}\end{figure}"))
    return doc


def latex_source(record, figures_dir=None) -> str:
    return document(record, figures_dir).dumps() + "\n"


def _tex_tool():
    if shutil.which("latexmk") and shutil.which("pdflatex"):
        return "latexmk"
    if shutil.which("pdflatex"):
        return "pdflatex"
    return None


def compile_pdf(source: str, workdir: str) -> bytes:
    """Compile LaTeX ``source`` in ``workdir``; the PDF's bytes."""
    tool = _tex_tool()
    if tool is None:
        raise DeriveError(INSTALL_HINT)
    tex = os.path.join(workdir, "record.tex")
    with open(tex, "w", encoding="utf-8") as f:
        f.write(source)
    env = dict(os.environ, openout_any="p", openin_any="p", shell_escape="f",
               SOURCE_DATE_EPOCH="0", FORCE_SOURCE_DATE="1")
    base = ["-no-shell-escape", "-interaction=nonstopmode", "-halt-on-error"]
    if tool == "latexmk":
        cmds = [["latexmk", "-pdf", "-quiet", *base, "record.tex"]]
    else:
        cmds = [["pdflatex", *base, "record.tex"]] * 2
    for cmd in cmds:
        p = subprocess.run(cmd, cwd=workdir, env=env, stdout=subprocess.PIPE,
                           stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL, timeout=300)
        if p.returncode != 0:
            log = p.stdout.decode("utf-8", "replace")
            logf = os.path.join(workdir, "record.log")
            if os.path.exists(logf):
                with open(logf, encoding="utf-8", errors="replace") as f:
                    log = f.read()
            err = [l for l in log.splitlines() if l.startswith("!")][:3]
            raise DeriveError("TeX could not typeset the record: " + ("; ".join(err) or
                                                                       log[-400:]))
    with open(os.path.join(workdir, "record.pdf"), "rb") as f:
        return f.read()


def render(record, fmt: str, args=None):
    """'tex': the LaTeX source (str). 'pdf': the PDF (bytes), which the caller writes (the
    command line, with every other format); with ``-o``, where TeX is missing or fails, the
    ``.tex`` is written beside the requested PDF."""
    output = getattr(args, "output", None) if args is not None else None
    if fmt == "tex":
        return latex_source(record)
    with tempfile.TemporaryDirectory(prefix="derive-tex-") as work:
        source = latex_source(record, figures_dir=work)
        try:
            pdf = compile_pdf(source, work)
        except DeriveError as e:
            if output:
                tex_path = os.path.splitext(output)[0] + ".tex"
                if os.path.lexists(tex_path) or os.path.abspath(tex_path) == \
                        os.path.abspath(output):
                    raise DeriveError(f"{e}; the LaTeX source was not written, since "
                                      f"{tex_path} exists already") from None
                write_atomic(tex_path, source, on_error=True)
                raise DeriveError(f"{e}; the LaTeX source was written to {tex_path}") from None
            raise
    return pdf
