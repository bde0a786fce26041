/*
 * Signing in and out: the form that asks for the token (shown instead of every view until one is accepted), who is
 * signed in, and "Change token", which forgets the token and starts again.
 */
/* global location */
import { $ } from './dom.js';
import { closeEvents } from './liveEvents.js';
import { canAct, forgetToken, session } from './session.js';

export function showSignIn(message) {
  $('sign-in').hidden = false;
  $('board').hidden = true;
  $('incident').hidden = true;
  $('component').hidden = true;
  $('sign-in-error').textContent = message ?? '';
  $('name').value = session.name;
  $('token').focus();
}

export function renderWho() {
  const role = canAct() ? 'responder' : session.roles.includes('viewer') ? 'viewer' : session.roles.join(', ');
  $('who-text').textContent = `Signed in as ${role}${session.name ? ` (${session.name})` : ''}`;
  $('sign-out').hidden = false;
}

export function signOut() {
  forgetToken();
  closeEvents();
  location.reload();
}
