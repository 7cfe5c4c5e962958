// Joining the camp server: the coordinator shows a join code (text and a
// QR code of this app's address ending in #join=CODE); the phone trades
// it for its own access token, kept in IndexedDB (meta "token") and sent
// by sync.js on every request. When the server refuses the token (401:
// the coordinator revoked it), the app says so plainly and asks for a new
// code; records waiting in the outbox stay and are sent after re-joining.
// This module builds its own screen and banner, so index.html needs none.

import * as db from "./db.js";
import { fetchJSON } from "./sync.js";

// codeFromAddress takes a join code from the address (#join=CODE) and
// removes it from the address bar and history: it works only once.
export function codeFromAddress() {
  const m = location.hash.match(/^#join=([0-9A-Za-z -]{1,40})$/);
  if (!m) return "";
  history.replaceState(null, "", location.pathname + location.search);
  return decodeURIComponent(m[1]);
}

let joins = 0;

// joinCount changes with every join on this page: a request that started
// before the latest join and was refused says nothing about the new token.
export function joinCount() {
  return joins;
}

export async function hasToken() {
  return Boolean(await db.getMeta("token"));
}

// join trades a code for this phone's token and returns the server's
// answer (the study and role it is enrolled for).
export async function join(code, deviceName) {
  let body;
  try {
    body = await fetchJSON(
      "/api/v1/join",
      { method: "POST", headers: { "Content-Type": "application/json" }, body: JSON.stringify({ code, device: deviceName }) },
      15000,
      false,
    );
  } catch (e) {
    if (e.name === "AbortError") throw new Error("the camp server did not answer in time; check the Wi-Fi and try again");
    throw e;
  }
  if (!body || !body.token) throw new Error("the camp server gave no token; ask the coordinator for a new code");
  await db.setMeta("token", body.token);
  joins++;
  await db.setMeta("enrolled", { id: body.id, study: (body.studies || [])[0], role: body.role, label: body.label });
  hideRevoked();
  return body;
}

function el(tag, props = {}, ...kids) {
  const e = Object.assign(document.createElement(tag), props);
  e.append(...kids);
  return e;
}

let screen = null;

// showJoinScreen shows the join step; onJoined gets the server's answer
// and the initials typed. code fills the box (from the address); observer
// fills the initials, which every record carries (the study list's
// initials field is not on this screen). A code from the address is sent
// at once only when the initials are known (a phone joining again);
// otherwise the crew types them first.
export function showJoinScreen(deviceName, onJoined, code = "", observer = "") {
  if (!screen) {
    screen = el("section", { id: "screen-enrol", className: "screen" });
    document.querySelector("main").prepend(screen);
  }
  const input = el("input", { id: "join-code", autocomplete: "off", autocapitalize: "characters", spellcheck: false, maxLength: 40, value: code, placeholder: "e.g. K7QM-3XTA-9PWE" });
  const who = el("input", { id: "join-observer", autocomplete: "name", maxLength: 60, value: observer });
  const name = el("input", { id: "join-device", maxLength: 80, value: deviceName });
  const err = el("p", { className: "error", id: "join-code-error", role: "alert" });
  const button = el("button", { type: "submit", className: "big primary", id: "join-submit", textContent: "Join" });
  const form = el("form", { id: "join-form", noValidate: true });
  form.addEventListener("submit", async (ev) => {
    ev.preventDefault();
    err.textContent = "";
    const initials = who.value.trim();
    if (!initials) {
      err.textContent = "Enter your name or initials: they are saved on each record.";
      who.focus();
      return;
    }
    button.disabled = true;
    try {
      onJoined(await join(input.value.trim(), name.value.trim() || deviceName), initials);
    } catch (e) {
      err.textContent = `${e.message}`;
    } finally {
      button.disabled = false;
    }
  });
  form.append(
    el("label", { htmlFor: "join-code", textContent: "Join code" }), input,
    el("label", { htmlFor: "join-observer", textContent: "Your name or initials (saved on each record)" }), who,
    el("label", { htmlFor: "join-device", textContent: "Name of this phone (the coordinator sees it)" }), name,
    err, button,
  );
  screen.replaceChildren(
    el("h1", { textContent: "Join the camp server" }),
    el("p", { className: "hint", textContent: "Ask the coordinator for a join code. Scan its QR code with the camera, or type the code here. You need the camp Wi-Fi for this step only." }),
    form,
  );
  for (const s of document.querySelectorAll(".screen")) s.hidden = s !== screen;
  if (code && observer.trim()) form.requestSubmit();
  else if (code) who.focus();
}

let banner = null;

// showRevoked tells the crew that the server refused this phone's token;
// onNewCode opens the join step.
export function showRevoked(onNewCode) {
  if (!banner) {
    const again = el("button", { type: "button", className: "big", id: "rejoin", textContent: "Enter a new join code" });
    again.addEventListener("click", () => onNewCode());
    banner = el("div", { className: "banner warn", id: "revoked-banner", role: "alert" },
      el("p", { textContent: "The camp server no longer accepts this phone (its access was revoked or has ended). Your records are safe in the outbox and will be sent once the phone joins again. Ask the coordinator for a new join code." }),
      again);
    document.querySelector("main").before(banner);
  }
  banner.hidden = false;
}

function hideRevoked() {
  if (banner) banner.hidden = true;
}
