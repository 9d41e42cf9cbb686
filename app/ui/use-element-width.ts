"use client";

import { useEffect, useRef, useState, type RefObject } from "react";

/**
 * The width, in whole CSS pixels, of the element the returned ref is attached to, kept current by
 * a ResizeObserver (0 until the first layout). For canvases and charts drawn to their card's width.
 */
export function useElementWidth<T extends HTMLElement = HTMLDivElement>(): [RefObject<T | null>, number] {
  const ref = useRef<T>(null);
  const [width, setWidth] = useState(0);
  useEffect(() => {
    const el = ref.current;
    if (!el) return;
    const ro = new ResizeObserver((e) => setWidth(Math.floor(e[0].contentRect.width)));
    ro.observe(el);
    return () => ro.disconnect();
  }, []);
  return [ref, width];
}
