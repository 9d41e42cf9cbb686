import type { Figure, Shape } from "@/pipeline/report/figures";

const dashOf = (d?: number[]) => (d ? `${d[0]} ${d[1] ?? d[0]}` : undefined);

function ShapeSvg({ s }: { s: Shape }) {
  switch (s.t) {
    case "line":
      return <line x1={s.x1} y1={s.y1} x2={s.x2} y2={s.y2} stroke={s.stroke} strokeWidth={s.width ?? 0.6} strokeDasharray={dashOf(s.dash)} />;
    case "path": {
      const d = s.points.map(([x, y], i) => `${i ? "L" : "M"}${x.toFixed(2)} ${y.toFixed(2)}`).join("") + (s.close ? "Z" : "");
      return <path d={d} fill={s.fill ?? "none"} stroke={s.stroke ?? (s.fill ? "none" : "#1f2933")} strokeWidth={s.width ?? 0.6} strokeDasharray={dashOf(s.dash)} />;
    }
    case "rect":
      return <rect x={s.x} y={s.y} width={s.w} height={s.h} fill={s.fill ?? "none"} stroke={s.stroke ?? (s.fill ? "none" : "#1f2933")} strokeWidth={s.width ?? 0.6} />;
    case "text":
      return (
        <text
          x={s.x}
          y={s.y}
          fontSize={s.size}
          fontWeight={s.bold ? 600 : 400}
          fill={s.color ?? "#1f2933"}
          textAnchor={s.anchor === "end" ? "end" : s.anchor === "middle" ? "middle" : "start"}
          transform={s.rotate ? `rotate(${s.rotate} ${s.x} ${s.y})` : undefined}
        >
          {s.text}
        </text>
      );
    case "image":
      return <image x={s.x} y={s.y} width={s.w} height={s.h} preserveAspectRatio="none" href={`data:image/png;base64,${Buffer.from(s.png).toString("base64")}`} style={{ imageRendering: "pixelated" }} />;
  }
}

/** A report panel (pipeline/report/figures.ts) as SVG: the same shapes the PDF draws, in points. */
export function FigureSvg({ figure, label }: { figure: Figure; label: string }) {
  return (
    <svg viewBox={`0 0 ${figure.width} ${figure.height}`} width="100%" role="img" aria-label={label} className="max-w-[720px] font-sans" style={{ breakInside: "avoid" }}>
      {figure.shapes.map((s, i) => (
        <ShapeSvg key={i} s={s} />
      ))}
    </svg>
  );
}
