// @ts-check
// The page's standing notices: the caution, the token form, the live-updates badge and the
// screen-reader announcements.
import { $ } from './dom.js';

const FALLBACK_CAUTION = 'Guidance only. Flood warnings are decided by the responsible local authority.';

/** @param {string} message */
export function showTokenForm(message) {
  $('token-form').hidden = false;
  $('token-message').textContent = message;
}

export function hideTokenForm() {
  $('token-form').hidden = true;
  $('token-message').textContent = '';
}

/**
 * The caution from the service's answer, or the page's own while there is none.
 * @param {string | null | undefined} text
 */
export function setCaution(text) {
  $('caution').textContent = text && text.trim() ? text : FALLBACK_CAUTION;
}

/** @param {string} text */
export function announce(text) {
  $('announce').textContent = text;
}

/**
 * @param {'connecting' | 'live' | 'waiting' | 'token'} stateName
 * @param {string} text
 */
export function setLive(stateName, text) {
  const el = $('live');
  el.dataset.state = stateName;
  el.textContent = text;
}
