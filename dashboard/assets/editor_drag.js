/* The profile editor (dashboard/editor_form.py): drag a number's handle sideways to move the
   value by steps of its data-step. The field's text is set as typing would set it, so the
   field's debounce sends the value once, when the drag pauses, not at every step. */
(function () {
  "use strict";
  const PIXELS_PER_STEP = 4;
  const setText = Object.getOwnPropertyDescriptor(HTMLInputElement.prototype, "value").set;
  const places = (text) => Math.min((String(text).split(".")[1] || "").length, 9);
  let drag = null;

  document.addEventListener("pointerdown", (event) => {
    const handle = event.target.closest ? event.target.closest(".editor-drag[data-step]") : null;
    const input = handle ? handle.closest(".editor-field").querySelector("input") : null;
    const start = input ? parseFloat(input.value) : NaN;
    if (!Number.isFinite(start)) { return; }
    const step = handle.dataset.step;
    drag = {input, start, x: event.clientX, step: parseFloat(step), decimals: Math.max(places(step), places(input.value))};
    handle.setPointerCapture(event.pointerId);
    handle.classList.add("dragging");
    event.preventDefault();
  });

  document.addEventListener("pointermove", (event) => {
    if (!drag) { return; }
    const steps = Math.round((event.clientX - drag.x) / PIXELS_PER_STEP);
    const text = String(parseFloat((drag.start + steps * drag.step).toFixed(drag.decimals)));
    if (drag.input.value !== text) {
      setText.call(drag.input, text);
      drag.input.dispatchEvent(new Event("input", {bubbles: true}));
    }
  });

  const stop = () => {
    if (drag) { document.querySelectorAll(".editor-drag.dragging").forEach((h) => h.classList.remove("dragging")); }
    drag = null;
  };
  document.addEventListener("pointerup", stop);
  document.addEventListener("pointercancel", stop);
})();
