# Generator of the `tripcount check` benchmark input: one C file of about
# 2,000 lines with 40 loop nests, set in the harbour-imaging and tide codes of
# the port city of Velin. The nests mix the shapes the gate meets in practice
# (rectangles, triangles, triple products, stencils, strides, guards, OpenMP
# loops), each function carries prose comments and scalar set-up code, so the
# file is closer to a real kernel file than 40 bare loops. Deterministic.

from __future__ import annotations

import argparse
import sys

SHAPES = [
    ("rect", """\
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++)
            {out}[i][j] = gain * {a}[i][j];"""),
    ("tri", """\
    for (int i = 0; i < N; i++)
        for (int j = 0; j <= i; j++)
            {out}[i][j] += {a}[i][j] * {a}[j][i];"""),
    ("product", """\
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++) {{
            double acc = 0.0;
            for (int k = 0; k < K; k++)
                acc += {a}[i][k] * {b}[k][j];
            {out}[i][j] = acc;
        }}"""),
    ("stencil", """\
    for (int i = 1; i < N - 1; i++)
        for (int j = 1; j < M - 1; j++)
            {out}[i][j] = 0.25 * ({a}[i - 1][j] + {a}[i + 1][j] + {a}[i][j - 1] + {a}[i][j + 1]);"""),
    ("strided", """\
    for (int i = 0; i < N; i += 2)
        for (int j = i; j < N; j += 3)
            {out}[i][j] -= {a}[j][i];"""),
    ("omp", """\
#pragma omp parallel for schedule(static)
    for (int i = 0; i < N; i++)
        for (int j = i; j < N; j++)
            {out}[i][j] = {a}[i][j] + {b}[j][i];"""),
    ("guard", """\
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++)
            if ((i + j) % 2 == 0)
                {out}[i][j] = {a}[i][j];"""),
    ("band", """\
    for (int i = 0; i < N; i++)
        for (int j = VELIN_MAX(0, i - BAND); j < VELIN_MIN(M, i + BAND + 1); j++)
            {out}[i][j] *= damping;"""),
]

TOPICS = ["sonar frame", "tide gauge series", "wave height field", "quay camera tile", "buoy spectrum",
          "harbour depth chart", "swell forecast", "lighthouse glare mask", "sediment grid", "current map"]


def generate(n_nests: int = 40, target_lines: int = 2000) -> str:
    """The C text of the benchmark file."""
    per_fn = 4
    n_fn = (n_nests + per_fn - 1) // per_fn
    head = [
        "/*",
        " * Velin harbour office -- batch kernels of the nightly imaging and tide runs.",
        " * Generated for the tripcount check benchmark (bench/gen_check_file.py).",
        " */",
        "#include <math.h>",
        "",
        "#define VELIN_MIN(a, b) ((a) < (b) ? (a) : (b))",
        "#define VELIN_MAX(a, b) ((a) > (b) ? (a) : (b))",
        "#define BAND 4",
        "",
    ]
    body: list[str] = []
    nest = 0
    fn_texts = []
    for f in range(n_fn):
        topic = TOPICS[f % len(TOPICS)]
        lines = [f"/* Pass {f + 1}: processing of the {topic}. */",
                 f"void velin_pass_{f + 1}(int N, int M, int K, double gain, double damping,",
                 "                   double X[restrict N][N], double Y[restrict N][N],",
                 "                   const double A[restrict N][N], const double B[restrict N][N])",
                 "{"]
        for k in range(per_fn):
            if nest >= n_nests:
                break
            name, shape = SHAPES[(f * per_fn + k) % len(SHAPES)]
            out, a, b = ("X", "A", "B") if k % 2 == 0 else ("Y", "B", "A")
            lines.append(f"    /* step {k + 1}: {name} sweep over the {topic} */")
            lines.extend(shape.format(out=out, a=a, b=b).split("\n"))
            lines.append("")
            nest += 1
        lines.append("}")
        lines.append("")
        fn_texts.append(lines)
    # Pad every function with prose and scalar code up to the target length.
    used = len(head) + sum(len(t) for t in fn_texts)
    pad_total = max(target_lines - used, 0)
    for f, lines in enumerate(fn_texts):
        share = pad_total // n_fn + (1 if f < pad_total % n_fn else 0)
        filler = []
        for p in range(share):
            if p % 6 == 0:
                filler.append(f"    /* calibration note {p // 6 + 1} of pass {f + 1}: gains are re-read nightly */")
            else:
                filler.append(f"    gain = gain * 1.0000{p % 10} + damping * 0.{p % 7 + 1};")
        # filler goes before the first nest (declarations and set-up), after the '{'
        at = lines.index("{") + 1
        lines[at:at] = filler
        body.extend(lines)
    return "\n".join(head + body) + "\n"


def main(argv: list[str] | None = None) -> int:
    """Write the file to the given path (or stdout)."""
    p = argparse.ArgumentParser(description=__doc__)
    p.add_argument("output", nargs="?", help="where to write the C file (default: stdout)")
    p.add_argument("--nests", type=int, default=40)
    p.add_argument("--lines", type=int, default=2000)
    args = p.parse_args(argv)
    text = generate(args.nests, args.lines)
    if args.output:
        with open(args.output, "w", encoding="utf-8") as f:
            f.write(text)
    else:
        sys.stdout.write(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
