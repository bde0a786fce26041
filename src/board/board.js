/*
 * The control-room board in the browser: open incidents by severity and waiting time, their trend charts, live
 * updates over server-sent events, and acknowledge / shelve / resolve with a note. Plain DOM, no framework: every
 * value from the server goes in as text (textContent), never as markup; the one exception is the chart, an SVG our
 * own server draws, which is parsed as SVG and stripped of anything active before it is shown (chart.js).
 *
 * This entry asks for the token, then starts the page's view: the board (boardView.js), the incident page
 * (incidentPage.js) or the component page (componentPage.js). Their parts are ES modules beside it, served from
 * /board/ like this one.
 */
/* global setInterval */
import { loadBoard } from './boardView.js';
import { cards, renderState } from './card.js';
import { loadComponentPage } from './componentPage.js';
import { $ } from './dom.js';
import { timeZoneNote } from './format.js';
import { loadIncidentPage } from './incidentPage.js';
import { connectEvents } from './liveEvents.js';
import { view } from './page.js';
import { reloadWith } from './reload.js';
import { canAct, session, signIn } from './session.js';
import { renderWho, showSignIn, signOut } from './signInView.js';

reloadWith(view === 'board' ? loadBoard : view === 'incident' ? loadIncidentPage : loadComponentPage);

async function start() {
  $('sign-in').hidden = true;
  $('time-note').textContent = timeZoneNote();
  renderWho();
  // Listen before loading, so that nothing that changes during the first load goes unseen.
  connectEvents();
  if (view === 'board') {
    $('board').hidden = false;
    const note = $('role-note');
    note.hidden = canAct();
    note.textContent = canAct() ? '' : 'This is a viewer token: the board is read-only. Acknowledge, shelve and resolve need a responder token.';
    await loadBoard();
    // Waiting times move on by themselves.
    setInterval(() => cards.forEach(renderState), 30_000);
  } else if (view === 'incident') {
    $('incident').hidden = false;
    await loadIncidentPage();
    setInterval(() => cards.forEach(renderState), 30_000);
  } else {
    $('component').hidden = false;
    await loadComponentPage();
  }
}

$('sign-in-form').addEventListener('submit', async (event) => {
  event.preventDefault();
  const token = $('token').value.trim();
  if (token === '') {
    $('sign-in-error').textContent = 'Enter the access token.';
    return;
  }
  const problem = await signIn(token, $('name').value.trim());
  if (problem !== undefined) {
    $('sign-in-error').textContent = problem;
    return;
  }
  $('token').value = '';
  await start();
  // After signing in, the keyboard starts at the view's title instead of the top of the document.
  $('view-title').focus();
});
$('sign-out').addEventListener('click', signOut);

if (session.token) {
  const problem = await signIn(session.token, session.name);
  if (problem === undefined) await start();
  else showSignIn(problem);
} else {
  showSignIn();
}
