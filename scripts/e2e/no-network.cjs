// Preloaded (node --require) into tools that must work offline, e.g. vsce while packaging:
// any attempt to open a network connection or resolve a host name fails at once with a
// message naming the target, instead of waiting for a time-out or reaching out.
// Invariant: local IPC (Unix sockets, pipes) and 127.0.0.1/::1 stay allowed; every other
// outgoing TCP/TLS/UDP connection and every DNS lookup throws.
'use strict';
const net = require('node:net');
const dns = require('node:dns');
const dgram = require('node:dgram');

function refuse(what) {
  const err = new Error(`no-network guard: this tool tried the network (${what}); it must work offline`);
  err.code = 'ESALTUSOFFLINE';
  process.stderr.write(`${err.message}\n`);
  throw err;
}

function isLocal(host) {
  return host === undefined || host === 'localhost' || host === '127.0.0.1' || host === '::1';
}

const connect = net.Socket.prototype.connect;
net.Socket.prototype.connect = function guardedConnect(...args) {
  const opts = typeof args[0] === 'object' && args[0] !== null && !Array.isArray(args[0]) ? args[0] : null;
  if (opts && opts.path) return connect.apply(this, args);
  if (Array.isArray(args[0]) && args[0][0] && args[0][0].path) return connect.apply(this, args);
  if (typeof args[0] === 'string' && Number.isNaN(Number(args[0]))) return connect.apply(this, args); // a pipe path
  const host = opts ? opts.host : typeof args[1] === 'string' ? args[1] : undefined;
  const port = opts ? opts.port : args[0];
  if (!isLocal(host)) refuse(`connect ${host}:${port}`);
  return connect.apply(this, args);
};

for (const name of ['lookup', 'resolve', 'resolve4', 'resolve6', 'resolveAny']) {
  const original = dns[name];
  dns[name] = function guardedLookup(host, ...rest) {
    if (isLocal(host)) return original.call(this, host, ...rest);
    return refuse(`dns ${name} ${host}`);
  };
  if (dns.promises && dns.promises[name]) {
    const p = dns.promises[name];
    dns.promises[name] = async function guardedLookupPromise(host, ...rest) {
      if (isLocal(host)) return p.call(this, host, ...rest);
      return refuse(`dns ${name} ${host}`);
    };
  }
}

const send = dgram.Socket.prototype.send;
dgram.Socket.prototype.send = function guardedSend(...args) {
  const address = args.find((a, i) => i > 0 && typeof a === 'string');
  if (!isLocal(address)) refuse(`udp send ${address}`);
  return send.apply(this, args);
};

if (typeof globalThis.fetch === 'function') {
  globalThis.fetch = async (input) => refuse(`fetch ${typeof input === 'string' ? input : input && input.url}`);
}
