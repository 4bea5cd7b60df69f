// qband operator page: takes sections pushed by the agent (Server-Sent Events) and puts them in
// place; sends acknowledge and shelve with the site token. No framework, nothing from outside.
'use strict';

(function () {
  const link = document.getElementById('link');
  let lastMessage = 0;
  let open = false;

  function say(text, abnormal) {
    link.textContent = text;
    link.classList.toggle('abnormal', abnormal);
    document.body.classList.toggle('stale', abnormal);
  }

  function place(id, html) {
    const old = document.getElementById(id);
    if (!old) return;
    const doc = new DOMParser().parseFromString(`<body>${html}</body>`, 'text/html');
    const next = doc.body.firstElementChild;
    if (next && next.id === id) old.replaceWith(document.importNode(next, true));
    refreshButtons();
  }

  const events = new EventSource('/events');
  events.addEventListener('open', () => {
    open = true;
    say('Live: updates arrive as the agent publishes them.', false);
  });
  events.addEventListener('section', (e) => {
    lastMessage = Date.now();
    const { id, html } = JSON.parse(e.data);
    place(id, html);
  });
  events.addEventListener('error', () => {
    open = false;
    say(`NOT LIVE since ${new Date().toISOString().slice(11, 19)} UTC: lost contact with the agent; showing its last data and trying again.`, true);
  });
  // The agent pushes its health every second: silence means the page is not live any more.
  setInterval(() => {
    if (open && Date.now() - lastMessage > 5000) say(`NOT LIVE: nothing from the agent for ${Math.round((Date.now() - lastMessage) / 1000)} s.`, true);
  }, 1000);

  // Commands: only with a token; the agent checks it and applies the same rules as on MQTT.
  const tokenInput = document.getElementById('token');
  const byInput = document.getElementById('by');
  const result = document.getElementById('command-result');
  const tokenState = document.getElementById('token-state');

  function refreshButtons() {
    const has = Boolean(tokenInput && tokenInput.value.trim());
    for (const b of document.querySelectorAll('button[data-action]')) b.disabled = !has;
    if (tokenState) tokenState.textContent = has ? 'Token entered: the agent checks it with each command.' : 'Read-only until a token is entered.';
  }
  if (tokenInput) {
    tokenInput.addEventListener('input', refreshButtons);
    document.getElementById('operator').addEventListener('submit', (e) => e.preventDefault());
  }
  refreshButtons();

  document.addEventListener('click', async (e) => {
    const b = e.target.closest('button[data-action]');
    if (!b || !tokenInput) return;
    const body = { asset: b.dataset.asset, action: b.dataset.action, component: b.dataset.component, order: b.dataset.order };
    if (b.dataset.duration) body.duration_s = Number(b.dataset.duration);
    if (byInput && byInput.value.trim()) body.by = byInput.value.trim();
    result.textContent = `Sending ${body.action}...`;
    try {
      const res = await fetch('/api/command', {
        method: 'POST',
        headers: { 'content-type': 'application/json', authorization: `Bearer ${tokenInput.value.trim()}` },
        body: JSON.stringify(body),
      });
      const reply = await res.json();
      result.textContent = reply.ok ? `${body.action} of ${body.component} / ${body.order} applied and published.` : `Refused (${reply.reason}): ${reply.detail}`;
      result.classList.toggle('abnormal', !reply.ok);
    } catch (err) {
      result.textContent = `Not sent: ${err.message}`;
      result.classList.add('abnormal');
    }
  });
})();
