// Access: the coordinator's session (sign-in with the one-time link that
// `tagtally serve` prints), the CSRF token every change carries, and the
// Access page: join codes for phones, the device list with revoke, peer
// tokens for other servers, and the audit log. Plain module; the helpers
// for building the page come from coord.js.

const API = "/api/v1";
let csrf = "";

// changeHeaders are the headers a state-changing request needs: the
// session cookie goes by itself, the CSRF token must be sent by the page.
export function changeHeaders() {
  return csrf ? { "X-CSRF-Token": csrf } : {};
}

// api calls the server's API and returns the decoded answer; a refusal
// throws an Error with the server's message, status and field. Every
// coordinator page sends its requests through here, so no change can go
// without the CSRF header.
export async function api(path, options = {}) {
  const method = options.method || "GET";
  const headers = { Accept: "application/json", ...(options.body ? { "Content-Type": "application/json" } : {}), ...(method === "GET" ? {} : changeHeaders()) };
  const res = await fetch(API + path, { cache: "no-store", ...options, headers });
  const text = await res.text();
  let body = null;
  try {
    body = text ? JSON.parse(text) : null;
  } catch {
    body = null;
  }
  if (!res.ok) {
    const err = new Error(body && body.error ? body.error : `the server answered ${res.status}`);
    err.status = res.status;
    err.field = body && body.field;
    throw err;
  }
  return body;
}

// signIn exchanges a claim code in the address (#claim=CODE, from the
// link printed by tagtally serve) for a session, or checks the session
// the browser already has. It returns true when signed in as coordinator.
export async function signIn() {
  const m = location.hash.match(/^#claim=([A-Za-z0-9_-]+)$/);
  if (m) {
    // The code is used up either way: take it out of the address bar and
    // the history before anything else.
    history.replaceState(null, "", location.pathname + location.search + "#summary");
    try {
      const ans = await api("/access/claim", { method: "POST", body: JSON.stringify({ code: m[1] }) });
      csrf = ans.csrf || "";
      return true;
    } catch (err) {
      if (err.status === 401 || err.status === 429) {
        signInProblem = err.message;
        return false;
      }
      throw err;
    }
  }
  try {
    const me = await api("/access/me");
    csrf = me.csrf || "";
    return me.role === "coordinator";
  } catch (err) {
    if (err.status === 401) return false;
    throw err;
  }
}

let signInProblem = "";

// signedOut is the page shown without a session.
export function signedOut(h) {
  return [
    h("h1", {}, "Sign in"),
    signInProblem ? h("p", { class: "msg", role: "alert" }, `That link did not work: ${signInProblem}`) : null,
    h("p", {}, "These pages need the coordinator link. When tagtally serve starts, it prints a link on the laptop's screen that ends in #claim=…; open it in this browser, on the laptop. It works once and for 12 hours."),
    h("p", {}, "Lost it? On the laptop, run tagtally access link for a new one (the old one then stops working)."),
  ];
}

function when(iso) {
  if (!iso) return "–";
  const d = new Date(iso);
  if (Number.isNaN(d.getTime()) || d.getUTCFullYear() < 1900) return "–";
  return d.toISOString().replace("T", " ").slice(0, 16) + " UTC";
}

const kindWords = {
  device: "phone",
  peer: "other server",
  session: "coordinator's browser",
  coordinator: "coordinator script",
  local: "commands on this laptop",
};

// viewAccess draws the Access page for the chosen study.
export async function viewAccess({ h, show, study, studyName }) {
  const [{ tokens }, { entries }] = await Promise.all([api("/access/tokens"), api("/access/audit?limit=100")]);

  // Join codes.
  const codeOut = h("div", { id: "join-code-out", "aria-live": "polite" });
  const makeCode = async (role) => {
    codeOut.replaceChildren(h("p", { class: "muted" }, "Making a code…"));
    try {
      const jc = await api(`/studies/${encodeURIComponent(study)}/join-codes`, { method: "POST", body: JSON.stringify({ role }) });
      codeOut.replaceChildren(h("div", { class: "join-code panel" },
        h("img", { src: `data:image/png;base64,${jc.qr_png}`, alt: `QR code of the join link for ${studyName}`, class: "qr" }),
        h("div", {},
          h("p", {}, `Scan this with the phone's camera, or open the app and type the code:`),
          h("p", { class: "code", id: "join-code-text" }, jc.code),
          h("p", { class: "small" }, `For ${studyName}, as ${role === "recorder" ? "a recorder (records captures)" : "a viewer (reads only)"}. It works once, until ${when(jc.expires)}.`),
          h("p", { class: "small muted" }, jc.url))));
    } catch (err) {
      codeOut.replaceChildren(h("p", { class: "msg" }, err.message));
    }
  };

  // Devices and other tokens.
  const revoke = async (t, btn) => {
    // Two taps, no dialog: the first asks, the second revokes.
    if (!btn.dataset.armed) {
      btn.dataset.armed = "1";
      btn.textContent = "Tap again to cut it off";
      return;
    }
    btn.disabled = true;
    try {
      await api(`/access/tokens/${encodeURIComponent(t.id)}/revoke`, { method: "POST" });
      btn.replaceWith(h("span", { class: "revoked" }, "revoked just now"));
    } catch (err) {
      btn.disabled = false;
      btn.replaceWith(h("span", { class: "msg" }, err.message));
    }
  };
  const rows = tokens.map((t) => h("tr", { "data-token": t.id, class: t.revoked ? "gone" : "" },
    h("td", {}, t.label || "–"),
    h("td", {}, kindWords[t.kind] || t.kind),
    h("td", {}, t.role),
    h("td", {}, t.studies ? t.studies.join(", ") : "all"),
    h("td", {}, when(t.created)),
    h("td", {}, when(t.last_used)),
    h("td", {}, t.revoked ? h("span", { class: "revoked" }, `revoked ${when(t.revoked)}`)
      : h("button", { type: "button", class: "danger big", "data-revoke": t.id, onclick: (ev) => revoke(t, ev.currentTarget) }, "Revoke"))));

  // Peer tokens.
  const peerOut = h("div", { id: "peer-token-out", "aria-live": "polite" });
  const peerLabel = h("input", { id: "peer-label", maxlength: "80", placeholder: "e.g. program office" });
  const makePeer = async () => {
    try {
      const t = await api("/access/tokens", { method: "POST", body: JSON.stringify({ kind: "peer", label: peerLabel.value.trim() || "other server", studies: [study] }) });
      peerOut.replaceChildren(h("div", { class: "panel" },
        h("p", {}, "Give this token to the other server's operator (tagtally sync --token). It is shown only now:"),
        h("p", { class: "code", id: "peer-token-text" }, t.token),
        h("p", { class: "small" }, `It syncs ${studyName} only, until you revoke it.`)));
    } catch (err) {
      peerOut.replaceChildren(h("p", { class: "msg" }, err.message));
    }
  };

  const audit = entries.map((e) => h("tr", {},
    h("td", {}, when(e.time)), h("td", {}, e.who || "(no valid token)"), h("td", {}, `${e.method} ${e.path}`),
    h("td", {}, e.study || ""), h("td", {}, e.record ? `…${e.record.slice(-8)}` : ""), h("td", { class: e.status >= 400 ? "bad" : "" }, String(e.status))));

  show(
    h("h1", {}, "Access"),
    h("h2", {}, "Add a phone"),
    h("p", {}, `Make a code, then scan it with the phone (or type it in the app). The phone can then use ${studyName} only.`),
    h("div", { class: "big-actions" },
      h("button", { type: "button", class: "primary big", id: "make-recorder-code", onclick: () => makeCode("recorder") }, "Code for a recorder"),
      h("button", { type: "button", class: "big", id: "make-viewer-code", onclick: () => makeCode("viewer") }, "Code for a viewer (read only)")),
    codeOut,
    h("h2", {}, "Phones and other access"),
    h("p", { class: "small" }, "Revoke a lost phone here: it is refused from its next request. The records it already sent stay."),
    h("table", { id: "token-table", class: "dense" },
      h("thead", {}, h("tr", {}, ["Name", "What", "Role", "Studies", "Added", "Last seen", ""].map((x) => h("th", {}, x)))),
      h("tbody", {}, rows)),
    h("h2", {}, "Another tagtally server"),
    h("p", {}, `A token for the program office's server (or another camp) to sync ${studyName}.`),
    h("p", {}, h("label", { for: "peer-label" }, "Its name "), peerLabel, " ", h("button", { type: "button", class: "big", id: "make-peer-token", onclick: makePeer }, "Make a sync token")),
    peerOut,
    h("h2", {}, "Audit log"),
    h("p", { class: "small" }, "Every change made through this server: who, what, and the answer (newest first; the last 100)."),
    h("table", { id: "audit-table", class: "dense" },
      h("thead", {}, h("tr", {}, ["When", "Who", "What", "Study", "Record", "Answer"].map((x) => h("th", {}, x)))),
      h("tbody", {}, audit)),
  );
}
