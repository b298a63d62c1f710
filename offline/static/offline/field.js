/* Quenby offline field entry.
 *
 * - Keeps, on request, the entry pages of the meters due soon ("quenby-kit" cache; sw.js serves them offline).
 * - An entry form saved without a network is checked here with the server's rules, then kept in IndexedDB
 *   with an id made on the tablet; it can be reviewed and changed before it is sent.
 * - Sending (when the network returns, or on "Send now") posts each entry once to /field/send/; the server
 *   treats the id as the entry's key, so sending again never makes a second record. A refused entry stays
 *   here with the server's messages.
 * - Logging out deletes the kept pages and entries, after a warning when some are not sent.
 *
 * No build step: this file is what the browser runs.
 */
(function () {
  "use strict";

  const DB_NAME = "quenby-field";
  const STORE = "entries";
  const KIT = "quenby-kit";
  const KIT_INFO = "quenby-kit-info";
  const INTERRUPTED = "quenby-interrupted";
  const body = document.body;
  const userId = body.dataset.user || "";

  // ---- the queue, in IndexedDB ------------------------------------------------------------------
  let dbPromise = null;

  function openDb() {
    if (!dbPromise) {
      dbPromise = new Promise((resolve, reject) => {
        const open = indexedDB.open(DB_NAME, 1);
        open.onupgradeneeded = () => open.result.createObjectStore(STORE, { keyPath: "id" });
        open.onsuccess = () => resolve(open.result);
        open.onerror = () => reject(open.error);
      });
    }
    return dbPromise;
  }

  async function run(mode, action) {
    const db = await openDb();
    return new Promise((resolve, reject) => {
      const tx = db.transaction(STORE, mode);
      const request = action(tx.objectStore(STORE));
      tx.oncomplete = () => resolve(request.result);
      tx.onerror = () => reject(tx.error);
      tx.onabort = () => reject(tx.error);
    });
  }

  const queue = {
    // only this account's entries are shown and sent
    mine: async () => (await run("readonly", (s) => s.getAll())).filter((e) => e.owner === userId)
      .sort((a, b) => a.savedAt.localeCompare(b.savedAt)),
    get: (id) => run("readonly", (s) => s.get(id)),
    put: (entry) => run("readwrite", (s) => s.put(entry)),
    remove: (id) => run("readwrite", (s) => s.delete(id)),
    clear: () => run("readwrite", (s) => s.clear()),
  };

  const unsent = (entries) => entries.filter((e) => e.state !== "sent");

  function newId() {
    if (self.crypto && crypto.randomUUID) {
      return crypto.randomUUID();
    }
    const b = crypto.getRandomValues(new Uint8Array(16));
    b[6] = (b[6] & 0x0f) | 0x40;
    b[8] = (b[8] & 0x3f) | 0x80;
    const h = Array.from(b, (x) => x.toString(16).padStart(2, "0")).join("");
    return `${h.slice(0, 8)}-${h.slice(8, 12)}-${h.slice(12, 16)}-${h.slice(16, 20)}-${h.slice(20)}`;
  }

  function localDate(d) {
    return `${d.getFullYear()}-${String(d.getMonth() + 1).padStart(2, "0")}-${String(d.getDate()).padStart(2, "0")}`;
  }

  function localToday(offsetDays) {
    const d = new Date();
    d.setDate(d.getDate() + (offsetDays || 0));
    return localDate(d);
  }

  function el(tag, attrs, ...children) {
    const node = document.createElement(tag);
    Object.entries(attrs || {}).forEach(([k, v]) => node.setAttribute(k, v));
    children.forEach((c) => node.append(c));
    return node;
  }

  // ---- header: "Waiting to send (n)" ----------------------------------------------------------------
  async function refreshBadge() {
    const nav = document.querySelector("header.bar nav");
    if (!nav || !userId) {
      return;
    }
    const n = unsent(await queue.mine()).length;
    let badge = document.getElementById("waiting-badge");
    if (n === 0) {
      if (badge) badge.remove();
      return;
    }
    if (!badge) {
      badge = el("a", { id: "waiting-badge", href: "/field/queue/", class: "waiting-badge" });
      nav.append(badge);
    }
    badge.textContent = `Waiting to send (${n})`;
  }

  // ---- sending --------------------------------------------------------------------------------------
  let sending = null;

  function sendAll() {
    if (!sending) {
      sending = sendWaiting().finally(() => { sending = null; });
    }
    return sending;
  }

  async function freshToken() {
    const response = await fetch("/field/token.json", { credentials: "same-origin", cache: "no-store" });
    if (!response.ok || response.redirected) {
      throw new Error("login");
    }
    return (await response.json()).csrf;
  }

  async function sendWaiting() {
    const outcome = { saved: 0, refused: 0, left: 0, problem: "" };
    const waiting = (await queue.mine()).filter((e) => e.state === "waiting");
    if (!waiting.length) {
      return outcome;
    }
    let token;
    try {
      token = await freshToken();
    } catch (err) {
      outcome.left = waiting.length;
      outcome.problem = err.message === "login" ? "Log in again to send." : "No network.";
      return outcome;
    }
    for (const entry of waiting) {
      // from here until the server answers, the entry may or may not have reached it
      entry.uncertain = true;
      await queue.put(entry);
      let response;
      try {
        response = await fetch("/field/send/", {
          method: "POST",
          credentials: "same-origin",
          headers: { "Content-Type": "application/json", "X-CSRFToken": token },
          body: JSON.stringify({ kind: entry.kind, id: entry.id, target: entry.target, data: entry.data }),
        });
      } catch (err) {
        outcome.left += 1;
        outcome.problem = "The network dropped while sending; what was not confirmed is sent again later.";
        continue;
      }
      let answer = {};
      try {
        answer = await response.json();
      } catch (err) {
        answer = {};
      }
      if (response.status === 201 || response.status === 200) {
        entry.uncertain = false;
        entry.url = answer.url;
        if (response.status === 200 && entry.changedAfterUncertainSend) {
          // the first send had arrived after all: the record holds the values sent then, not the later changes
          entry.state = "refused";
          entry.errors = { __all__: [
            "This entry had already reached the server before your last changes, so the saved draft does not " +
            "include them. Open the draft to compare, then discard this copy." ] };
          outcome.refused += 1;
        } else {
          entry.state = "sent";
          entry.errors = {};
          entry.sentAt = new Date().toISOString();
          outcome.saved += 1;
        }
        await queue.put(entry);
      } else if (response.status === 422 || (answer.errors && response.status < 500)) {
        entry.uncertain = false;
        entry.state = "refused";
        entry.errors = answer.errors || {};
        await queue.put(entry);
        outcome.refused += 1;
      } else {
        // not answered by the send handler (page refused the post, server error, busy): try again later
        outcome.left += 1;
        outcome.problem = response.status === 403
          ? "The server refused the send; log in again." : "The server could not take the entry now; it is sent again later.";
      }
    }
    return outcome;
  }

  function describeOutcome(o) {
    const parts = [];
    if (o.saved) parts.push(`${o.saved} sent`);
    if (o.refused) parts.push(`${o.refused} refused (see below)`);
    if (o.left) parts.push(`${o.left} still waiting`);
    if (!parts.length) parts.push("Nothing to send");
    return parts.join(", ") + "." + (o.problem ? ` ${o.problem}` : "");
  }

  async function autoSend() {
    if (!navigator.onLine || !userId || document.getElementById("offline-entry")) {
      return; // not from an entry page: an entry may be open for changes there
    }
    if (!(await queue.mine()).some((e) => e.state === "waiting")) {
      return;
    }
    const outcome = await sendAll();
    await refreshBadge();
    await renderQueue(outcome);
  }

  // ---- field names for messages ---------------------------------------------------------------------
  const GRID = { af: "As-found", al: "As-left" };
  const COLUMN = { reference_value: "reference", indicated_value: "indicated", repeats: "repeats",
    resolution: "resolution", nominal_pct: "nominal" };

  function fieldLabel(entry, name) {
    if (name === "__all__") {
      return "";
    }
    const row = /^(af|al)-(\d+)-(\w+)$/.exec(name);
    if (row) {
      const nominal = (entry.data.find(([n]) => n === `${row[1]}-${row[2]}-nominal_pct`) || [])[1];
      return `${GRID[row[1]]} ${nominal !== undefined ? nominal + " %" : "row " + (Number(row[2]) + 1)}, ${COLUMN[row[3]] || row[3]}`;
    }
    return (entry.labels && entry.labels[name]) || name.replace(/^ev-/, "").replace(/_/g, " ");
  }

  // ---- the "Waiting to send" page -------------------------------------------------------------------
  async function renderQueue(outcome) {
    const list = document.getElementById("queue-list");
    if (!list) {
      return;
    }
    const entries = await queue.mine();
    const waiting = unsent(entries);
    const sent = entries.filter((e) => e.state === "sent");
    document.getElementById("queue-title").textContent = `Waiting to send (${waiting.length})`;
    document.getElementById("queue-empty").hidden = waiting.length > 0;
    if (outcome) {
      document.getElementById("queue-status").textContent = describeOutcome(outcome);
    }
    list.replaceChildren(...waiting.map(queueItem));
    const sentList = document.getElementById("sent-list");
    document.getElementById("sent-section").hidden = sent.length === 0;
    sentList.replaceChildren(...sent.map((e) => el("li", { class: "queue-item state-sent", "data-id": e.id },
      el("a", { href: e.url || "#" }, `${e.title} · ${e.date}`), " — saved as a draft; open it to sign")));
  }

  function queueItem(entry) {
    const refused = entry.state === "refused";
    const item = el("li", { class: `queue-item state-${entry.state}`, "data-id": entry.id },
      el("div", { class: "queue-head" }, el("strong", {}, entry.title), ` · ${entry.date}`),
      el("div", { class: "queue-state" }, refused ? "Refused by the server; change it and it is sent again:" : "Waiting to send"));
    if (refused) {
      const messages = el("ul", { class: "errorlist" });
      Object.entries(entry.errors || {}).forEach(([name, texts]) => texts.forEach((text) => {
        const label = fieldLabel(entry, name);
        messages.append(el("li", { "data-field": name }, label ? `${label}: ${text}` : text));
      }));
      item.append(messages);
      if (entry.url) {
        item.append(el("p", {}, el("a", { href: entry.url }, "Open the saved draft")));
      }
    }
    const discard = el("button", { type: "button", class: "secondary-button", "data-action": "discard" }, "Discard");
    discard.addEventListener("click", async () => {
      if (discard.dataset.armed !== "1") {
        discard.dataset.armed = "1";
        discard.textContent = "Delete it from this tablet";
        return;
      }
      await queue.remove(entry.id);
      await refreshBadge();
      await renderQueue();
    });
    item.append(el("div", { class: "queue-actions" },
      el("a", { class: "button", href: `${entry.page}#edit=${entry.id}` }, "Review or change"), " ", discard));
    return item;
  }

  function initQueuePage() {
    const button = document.getElementById("queue-send");
    if (!button) {
      return;
    }
    const kept = /#kept=/.test(location.hash);
    document.getElementById("queue-kept").hidden = !kept;
    button.addEventListener("click", async () => {
      button.disabled = true;
      document.getElementById("queue-status").textContent = "Sending…";
      try {
        const outcome = await sendAll();
        await renderQueue(outcome);
      } finally {
        button.disabled = false;
        await refreshBadge();
      }
    });
    renderQueue();
  }

  // ---- keeping pages for offline work ---------------------------------------------------------------
  function showKitInfo() {
    const status = document.getElementById("kit-status");
    const info = JSON.parse(localStorage.getItem(KIT_INFO) || "null");
    if (status && info && info.owner === userId) {
      const at = new Date(info.at);
      const time = `${String(at.getHours()).padStart(2, "0")}:${String(at.getMinutes()).padStart(2, "0")}`;
      status.textContent = `Kept on this tablet: ${info.meters} entry pages, ${localDate(at)} ${time}.`;
    }
  }

  async function prepareKit() {
    const status = document.getElementById("kit-status");
    const button = document.getElementById("kit-prepare");
    button.disabled = true;
    status.textContent = "Keeping the pages on this tablet…";
    try {
      if ("serviceWorker" in navigator) {
        await navigator.serviceWorker.ready; // the worker that serves them offline is in place
      }
      const listing = await fetch(`/field/kit.json${location.search}`, { credentials: "same-origin", cache: "no-store" });
      if (!listing.ok || listing.redirected) {
        throw new Error("The list of pages could not be read; log in again.");
      }
      const kit = await listing.json();
      const here = location.pathname + location.search;
      const urls = [...new Set([here, ...kit.pages, ...kit.assets])];
      const responses = [];
      for (const url of urls) {
        const response = await fetch(url, { credentials: "same-origin", cache: "no-store" });
        if (!response.ok || response.redirected) {
          throw new Error(`${url} could not be read (${response.status}).`);
        }
        responses.push([url, response]);
      }
      await caches.delete(KIT);
      const cache = await caches.open(KIT);
      for (const [url, response] of responses) {
        await cache.put(url, response);
      }
      const meters = kit.pages.filter((u) => !u.startsWith("/field/")).length;
      localStorage.setItem(KIT_INFO, JSON.stringify({ owner: userId, at: new Date().toISOString(), meters }));
      showKitInfo();
    } catch (err) {
      status.textContent = `Not kept: ${err.message === "Failed to fetch" ? "no network." : err.message}`;
    } finally {
      button.disabled = false;
    }
  }

  function initHomePage() {
    const button = document.getElementById("kit-prepare");
    if (button) {
      button.addEventListener("click", prepareKit);
      showKitInfo();
    }
  }

  async function dropOtherAccountsKit() {
    const info = JSON.parse(localStorage.getItem(KIT_INFO) || "null");
    if (info && userId && info.owner !== userId && self.caches) {
      await caches.delete(KIT); // another account's pages: not for this one
      localStorage.removeItem(KIT_INFO);
    }
  }

  // ---- the entry form ------------------------------------------------------------------------------
  function formData(form) {
    return Array.from(new FormData(form).entries())
      .filter(([name, value]) => !["csrfmiddlewaretoken", "offline-kind"].includes(name) && typeof value === "string");
  }

  function fillForm(form, data) {
    const values = {};
    data.forEach(([name, value]) => (values[name] = values[name] || []).push(value));
    Array.from(form.elements).forEach((field) => {
      if (!field.name || ["csrfmiddlewaretoken", "offline-kind"].includes(field.name) || field.type === "submit") {
        return;
      }
      const given = values[field.name] || [];
      if (field.type === "checkbox" || field.type === "radio") {
        field.checked = given.includes(field.value);
      } else {
        field.value = given.length ? given[0] : "";
      }
    });
  }

  function clearMessages(form) {
    form.querySelectorAll("[data-offline-message]").forEach((node) => node.remove());
    form.querySelectorAll("[data-offline-invalid]").forEach((node) => {
      node.removeAttribute("aria-invalid");
      node.removeAttribute("data-offline-invalid");
    });
    const summary = document.getElementById("offline-summary");
    summary.hidden = true;
    summary.replaceChildren();
  }

  function showMessages(form, errors, heading) {
    clearMessages(form);
    const general = [];
    Object.entries(errors).forEach(([name, texts]) => {
      const fields = form.querySelectorAll(`[name="${CSS.escape(name)}"]`);
      if (name === "__all__" || !fields.length) {
        general.push(...texts);
        return;
      }
      fields.forEach((f) => { f.setAttribute("aria-invalid", "true"); f.setAttribute("data-offline-invalid", ""); });
      const last = fields[fields.length - 1];
      const place = last.closest(".field, td") || last.parentElement;
      place.append(el("ul", { class: "errorlist", "data-offline-message": "", "data-field": name },
        ...texts.map((t) => el("li", {}, t))));
    });
    const summary = document.getElementById("offline-summary");
    summary.append(el("p", { class: "errorlist summary" }, heading));
    if (general.length) {
      summary.append(el("ul", { class: "errorlist" }, ...general.map((t) => el("li", {}, t))));
    }
    summary.hidden = false;
    summary.scrollIntoView({ block: "start" });
  }

  /* The server's rules that can be checked without it (rules come from the server's form, see rules.py). */
  function check(form, rules) {
    const errors = {};
    const add = (name, text) => { if (text) (errors[name] = errors[name] || []).push(text); };
    const data = new FormData(form);
    const text = (name) => String(data.get(name) || "").trim();
    const m = rules.messages;
    Object.entries(rules.required || {}).forEach(([name, message]) => {
      if (!data.getAll(name).some((v) => String(v).trim())) add(name, message);
    });
    const dateName = dateField(rules);
    const date = text(dateName);
    if (date && date > localToday(1)) add(dateName, m.future_date);
    // reference readings are in the ticked standard's units: the range (in the meter's) is checked only when
    // those are the meter's; a standard reading mass against volume (or back) needs the density
    const ticked = data.getAll("ev-reference_standards").map(String);
    const standardUnits = rules.standard_units || {};
    const meterUnits = ticked.every((pk) => !standardUnits[pk] || standardUnits[pk] === rules.meter_units);
    const density = ticked.map((pk) => (m.density_required || {})[pk]).find(Boolean);
    if (density && !text("ev-density_kg_m3")) add("ev-density_kg_m3", density);
    const filled = {};
    (rules.grids || []).forEach((prefix) => {
      filled[prefix] = 0;
      const rows = Number(text(`${prefix}-TOTAL_FORMS`)) || 0;
      for (let i = 0; i < rows; i += 1) {
        const name = (field) => `${prefix}-${i}-${field}`;
        if (data.get(name("DELETE"))) continue;  // ticked "remove": neither checked nor sent as a point
        const ref = text(name("reference_value"));
        const ind = text(name("indicated_value"));
        const repeats = text(name("repeats"));
        if (!ref && !ind && !repeats) {
          if (prefix === "af") add(name("reference_value"), m.blank_as_found_row);
          continue;
        }
        filled[prefix] += 1;
        const refValue = Number(ref);
        if (ref && !Number.isFinite(refValue)) add(name("reference_value"), m.reference_invalid);
        if (ind && !Number.isFinite(Number(ind))) add(name("indicated_value"), m.indicated_invalid);
        if (!ref) add(name("reference_value"), m.reference_required);
        if (!ind && !repeats) add(name("indicated_value"), m.indicated_required);
        if (ref && Number.isFinite(refValue)) {
          if (refValue < 0) add(name("reference_value"), m.negative);
          else if (meterUnits && (refValue < rules.range_min || refValue > rules.range_max)) {
            add(name("reference_value"), m.outside_range.replace("{value}", String(refValue)));
          } else if (refValue === 0) add(name("reference_value"), m.zero_of_reading);
        }
        // a reading the meter could not explain is held until the header's tick confirms it (plausibility.py)
        const hold = rules.hold;
        const indValue = ind ? Number(ind) : NaN;
        const checked = form.querySelector('[name="ev-values_checked"]');
        if (hold && meterUnits && m.check_value && !(checked && checked.checked)
            && Number.isFinite(refValue) && Number.isFinite(indValue) && refValue > 0) {
          const span = rules.range_max - rules.range_min;
          const mpe = rules.mpe_basis === "pct_reading" ? hold.mpe_value * Math.abs(refValue) / 100
            : rules.mpe_basis === "pct_span" ? hold.mpe_value * span / 100 : hold.mpe_value;
          const offScale = indValue > hold.range_factor * rules.range_max
            || indValue < rules.range_min - (hold.range_factor - 1) * span;
          if (offScale || (mpe > 0 && Math.abs(indValue - refValue) > hold.mpe_factor * mpe)) {
            add(name("indicated_value"), m.check_value);
          }
        }
      }
    });
    Object.entries(rules.conditions || {}).forEach(([field, [low, high, message]]) => {
      const raw = text(field);
      if (!raw) return;
      const value = Number(raw);
      if (Number.isFinite(value) && (value < low || value > high || (field === "ev-density_kg_m3" && value <= 0))) {
        add(field, message.replace("{value}", String(value)));
      }
    });
    if ("af" in filled && filled.af === 0) add("__all__", m.as_found_required);
    const adjusted = form.querySelector('[name="ev-adjusted"]');
    if (adjusted && adjusted.checked && filled.al === 0) add("__all__", m.as_left_required);
    return errors;
  }

  // the date input of an entry: the calibration form's, unless the kind's rules name another
  const dateField = (rules) => (rules && rules.date_field) || "ev-performed_on";

  function labelsOf(form, rules) {
    const labels = Object.assign({}, (rules && rules.labels) || {});
    form.querySelectorAll("label[for]").forEach((label) => {
      const field = document.getElementById(label.htmlFor);
      if (field && field.name && field.name.startsWith("ev-") && field.type !== "checkbox") {
        labels[field.name] = label.textContent.replace(/:\s*$/, "").trim();
      }
    });
    const standards = form.querySelector('[name="ev-reference_standards"]');
    if (standards) labels["ev-reference_standards"] = "Reference standards";
    return labels;
  }

  async function initEntryPage() {
    const config = document.getElementById("offline-entry");
    if (!config) {
      return;
    }
    const settings = JSON.parse(config.textContent);
    const form = config.closest("form");
    const note = document.getElementById("offline-note");
    const submit = form.querySelector('button[type="submit"]');
    const saveText = submit.textContent;
    const editId = (/#edit=([\w-]+)/.exec(location.hash) || [])[1];
    let editing = null;
    let interrupted = false;

    // a page kept for offline work shows the date it was kept; a new entry is for today
    const date = form.querySelector(`[name="${dateField(settings.rules)}"]`);
    if (!editId && date && date.value === settings.rendered_on && settings.rendered_on !== localToday()) {
      date.value = localToday();
    }
    const showNetwork = () => {
      note.hidden = navigator.onLine || Boolean(editing) || interrupted;
      submit.textContent = editing ? "Keep the changes"
        : (navigator.onLine && !interrupted ? saveText : "Keep on this tablet");
    };
    window.addEventListener("online", showNetwork);
    window.addEventListener("offline", showNetwork);

    if (editId) {
      editing = await queue.get(editId);
      if (editing && editing.owner === userId && editing.state !== "sent") {
        fillForm(form, editing.data);
        document.getElementById("offline-editing").hidden = false;
        if (editing.state === "refused") {
          showMessages(form, editing.errors || {}, "The server refused this entry: correct the fields marked in red.");
        }
      } else {
        editing = null;
      }
    }
    if (!editing && /#interrupted/.test(location.hash) && self.caches) {
      // sw.js kept this form's fields when its post found no network
      const cache = await caches.open(INTERRUPTED);
      const kept = await cache.match(location.pathname);
      if (kept) {
        fillForm(form, await kept.json());
        await cache.delete(location.pathname);
        interrupted = true;
        document.getElementById("offline-interrupted").hidden = false;
      }
    }
    showNetwork();
    form.dataset.offlineReady = "1";

    form.addEventListener("submit", async (event) => {
      if (!editing && !interrupted && navigator.onLine) {
        return; // online: the form is posted to the server as usual
      }
      event.preventDefault();
      const errors = check(form, settings.rules || {});
      if (Object.keys(errors).length) {
        showMessages(form, errors, "Not kept yet: correct the fields marked in red below.");
        return;
      }
      clearMessages(form);
      const now = new Date().toISOString();
      const entry = editing || { id: newId(), kind: settings.kind, target: settings.target, owner: userId,
        page: location.pathname, savedAt: now };
      entry.data = formData(form);
      entry.labels = labelsOf(form, settings.rules);
      entry.title = `${settings.title} · ${settings.label}`;
      entry.date = (date && date.value) || "";
      entry.updatedAt = now;
      if (editing && editing.uncertain) {
        entry.changedAfterUncertainSend = true;
      }
      entry.state = "waiting";
      entry.errors = {};
      await queue.put(entry);
      location.assign(`/field/queue/#kept=${entry.id}`);
    });
  }

  // ---- logging out ---------------------------------------------------------------------------------
  async function clearTablet() {
    await queue.clear();
    if (self.caches) {
      await caches.delete(KIT);
      await caches.delete(INTERRUPTED);
    }
    localStorage.removeItem(KIT_INFO);
  }

  function initLogout() {
    const form = document.querySelector("form.who");
    if (!form) {
      return;
    }
    form.addEventListener("submit", async (event) => {
      event.preventDefault();
      const waiting = unsent(await queue.mine());
      if (waiting.length && form.dataset.confirmed !== "1") {
        showLogoutWarning(form, waiting.length);
        return;
      }
      await clearTablet();
      form.submit(); // not a submit event: goes straight to the server
    });
  }

  function showLogoutWarning(form, n) {
    if (document.getElementById("logout-warning")) {
      return;
    }
    const goOn = el("button", { type: "button", class: "danger-button" }, `Log out and delete ${n === 1 ? "it" : "them"}`);
    const stay = el("button", { type: "button", class: "secondary-button" }, "Stay logged in");
    const box = el("div", { id: "logout-warning", class: "logout-warning", role: "alert" },
      el("p", {}, el("strong", {}, `${n} ${n === 1 ? "entry has" : "entries have"} not been sent.`),
        " Logging out deletes them from this tablet. ", el("a", { href: "/field/queue/" }, "Send them first")),
      el("div", { class: "queue-actions" }, goOn, " ", stay));
    goOn.addEventListener("click", () => { form.dataset.confirmed = "1"; form.requestSubmit(); });
    stay.addEventListener("click", () => box.remove());
    document.querySelector("main").prepend(box);
    box.scrollIntoView({ block: "start" });
  }

  // ---- start -----------------------------------------------------------------------------------------
  async function forgetOldSent() {
    const week = 7 * 24 * 3600 * 1000;
    for (const entry of await queue.mine()) {
      if (entry.state === "sent" && Date.now() - Date.parse(entry.sentAt) > week) {
        await queue.remove(entry.id); // the record is on the server; the link here is only a convenience
      }
    }
  }

  async function start() {
    if (!userId) {
      return;
    }
    if ("serviceWorker" in navigator) {
      navigator.serviceWorker.register("/sw.js", { scope: "/" }).catch(() => {});
    }
    initLogout();
    await dropOtherAccountsKit();
    await forgetOldSent();
    initHomePage();
    initQueuePage();
    await initEntryPage();
    await refreshBadge();
    window.addEventListener("online", autoSend);
    await autoSend();
    body.dataset.fieldReady = "1";
  }

  start();
})();
