"use client";

import { useEffect, useRef, useState } from "react";
import { useElementWidth } from "../use-element-width";
import { drawGather, fullWindow, MARGIN, pointAt, type DisplaySettings, type GatherView, type Overlays, type ViewWindow } from "./draw-traces";

/**
 * One gather on a canvas. Wheel zooms time around the pointer (with Shift: offset), dragging
 * pans, double-click shows the whole gather. The view is controlled so panels can share it.
 * The last draw time (ms) is kept in the canvas's data-draw-ms attribute and its tooltip.
 * The wheel listener is registered as non-passive so zooming does not also scroll the page.
 */
export function TraceCanvas({
  gather,
  settings,
  view,
  onViewChange,
  overlays,
  second,
  title,
  height = 520,
  testId,
  onPointAt,
}: {
  gather: GatherView;
  settings: DisplaySettings;
  view: ViewWindow;
  onViewChange: (v: ViewWindow) => void;
  overlays?: Overlays;
  second?: GatherView;
  title?: string;
  height?: number;
  testId?: string;
  /** A click (a press and release without dragging) at a trace and time, e.g. to set a pick there. */
  onPointAt?: (p: { traceIndex: number; timeS: number }) => void;
}) {
  const [wrap, width] = useElementWidth();
  const canvas = useRef<HTMLCanvasElement>(null);
  const [drawMs, setDrawMs] = useState<number | null>(null);
  const drag = useRef<{ x: number; y: number; view: ViewWindow } | null>(null);

  useEffect(() => {
    const c = canvas.current;
    if (!c || width === 0) return;
    const dpr = Math.min(2, window.devicePixelRatio || 1);
    c.width = Math.round(width * dpr);
    c.height = Math.round(height * dpr);
    const ctx = c.getContext("2d");
    if (!ctx) return;
    const ms = drawGather(ctx, { width, height, dpr }, gather, settings, view, overlays, second, title);
    c.dataset.drawMs = ms.toFixed(2);
    setDrawMs(ms);
  }, [width, height, gather, settings, view, overlays, second, title]);

  function onWheel(e: WheelEvent) {
    const rect = canvas.current!.getBoundingClientRect();
    const factor = e.deltaY > 0 ? 1.2 : 1 / 1.2;
    const full = fullWindow(gather, settings);
    if (e.shiftKey) {
      const fx = (e.clientX - rect.left - MARGIN.left) / (rect.width - MARGIN.left - MARGIN.right);
      const at = view.xMin + fx * (view.xMax - view.xMin);
      const span = Math.min(full.xMax - full.xMin, (view.xMax - view.xMin) * factor);
      const xMin = Math.max(full.xMin, Math.min(at - fx * span, full.xMax - span));
      onViewChange({ ...view, xMin, xMax: xMin + span });
    } else {
      const fy = (e.clientY - rect.top - MARGIN.top) / (rect.height - MARGIN.top - MARGIN.bottom);
      const at = view.tMinS + fy * (view.tMaxS - view.tMinS);
      const span = Math.max(gather.dtS * 8, Math.min(full.tMaxS - full.tMinS, (view.tMaxS - view.tMinS) * factor));
      const tMinS = Math.max(full.tMinS, Math.min(at - fy * span, full.tMaxS - span));
      onViewChange({ ...view, tMinS, tMaxS: tMinS + span });
    }
  }

  // React registers wheel listeners as passive, where preventDefault is ignored: listen natively.
  const wheelRef = useRef<(e: WheelEvent) => void>(() => undefined);
  useEffect(() => {
    wheelRef.current = onWheel;
  });
  useEffect(() => {
    const c = canvas.current;
    if (!c) return;
    const listener = (e: WheelEvent) => {
      e.preventDefault();
      wheelRef.current(e);
    };
    c.addEventListener("wheel", listener, { passive: false });
    return () => c.removeEventListener("wheel", listener);
  }, []);

  function onPointerDown(e: React.PointerEvent<HTMLCanvasElement>) {
    e.currentTarget.setPointerCapture(e.pointerId);
    drag.current = { x: e.clientX, y: e.clientY, view };
  }
  function onPointerMove(e: React.PointerEvent<HTMLCanvasElement>) {
    const d = drag.current;
    if (!d) return;
    const rect = e.currentTarget.getBoundingClientRect();
    const full = fullWindow(gather, settings);
    const pw = rect.width - MARGIN.left - MARGIN.right;
    const ph = rect.height - MARGIN.top - MARGIN.bottom;
    const dxUnits = ((e.clientX - d.x) / pw) * (d.view.xMax - d.view.xMin);
    const dtS = ((e.clientY - d.y) / ph) * (d.view.tMaxS - d.view.tMinS);
    const spanX = d.view.xMax - d.view.xMin;
    const spanT = d.view.tMaxS - d.view.tMinS;
    const xMin = Math.max(full.xMin, Math.min(d.view.xMin - dxUnits, full.xMax - spanX));
    const tMinS = Math.max(full.tMinS, Math.min(d.view.tMinS - dtS, full.tMaxS - spanT));
    onViewChange({ xMin, xMax: xMin + spanX, tMinS, tMaxS: tMinS + spanT });
  }
  function onPointerUp(e: React.PointerEvent<HTMLCanvasElement>) {
    const d = drag.current;
    drag.current = null;
    // Less than 4 px of movement is a click, not a pan.
    if (!d || !onPointAt || Math.hypot(e.clientX - d.x, e.clientY - d.y) >= 4) return;
    const rect = e.currentTarget.getBoundingClientRect();
    const hit = pointAt(gather, settings, view, { width: rect.width, height: rect.height }, e.clientX - rect.left, e.clientY - rect.top);
    if (hit) onPointAt(hit);
  }

  return (
    <div ref={wrap} className="relative w-full select-none">
      <canvas
        ref={canvas}
        data-testid={testId}
        style={{ width: "100%", height, touchAction: "none", cursor: onPointAt ? "crosshair" : "grab" }}
        onPointerDown={onPointerDown}
        onPointerMove={onPointerMove}
        onPointerUp={onPointerUp}
        onDoubleClick={() => onViewChange(fullWindow(gather, settings))}
        aria-label={title ? `Traces: ${title}` : "Traces"}
        title={drawMs !== null ? `drawn in ${drawMs.toFixed(1)} ms` : undefined}
        role="img"
      />
    </div>
  );
}
