/**
 * Test-only fault injection for child processes: `node --import <this file> dist/cli/main.js …` with
 * KINDRED_TEST_FS_FAULT set to JSON makes chosen file-system calls fail the way a full disk or an unreadable
 * file does, without a real full disk or a non-root user (tests run as root in CI). Documented in
 * docs/reliability.md. Nothing in src/ knows about it: it patches node:fs before kindred loads.
 *
 *   { "write": "<regex>", "code": "ENOSPC", "afterBytes": 0 }
 *       writes to a path matching the regex fail with `code` once `afterBytes` bytes have been written to it
 *       (the first afterBytes bytes do reach the file, as on a disk that fills up); link, symlink, copyFile,
 *       rename and mkdir whose destination matches fail at once.
 *   { "read": "<regex>", "code": "EACCES" }
 *       opening (or access-checking) a matching path for reading fails with `code`.
 *   { "sync": "<regex>", "code": "EIO" }
 *       syncing (fsync, fsyncSync) a file opened for writing at a matching path fails with `code`: its bytes were
 *       all written, but the disk could not keep them.
 */
import fs from 'node:fs';
import { syncBuiltinESMExports } from 'node:module';

const spec = process.env.KINDRED_TEST_FS_FAULT ? JSON.parse(process.env.KINDRED_TEST_FS_FAULT) : null;

if (spec) {
  const writeRe = spec.write ? new RegExp(spec.write) : null;
  const readRe = spec.read ? new RegExp(spec.read) : null;
  const syncRe = spec.sync ? new RegExp(spec.sync) : null;
  const code = spec.code ?? (writeRe ? 'ENOSPC' : syncRe ? 'EIO' : 'EACCES');
  const afterBytes = spec.afterBytes ?? 0;
  const messages = { ENOSPC: 'no space left on device', EACCES: 'permission denied', EIO: 'i/o error' };

  const fault = (syscall, p) => {
    const e = new Error(`${code}: ${messages[code] ?? 'injected fault'}, ${syscall} '${p}'`);
    e.code = code;
    e.errno = -28;
    e.syscall = syscall;
    if (p !== undefined) e.path = String(p);
    return e;
  };
  const text = (p) => (p instanceof URL ? p.pathname : String(p));
  const forWrite = (flags) => {
    if (flags === undefined) return false;
    if (typeof flags === 'number') return (flags & (fs.constants.O_WRONLY | fs.constants.O_RDWR)) !== 0;
    return /[wa+]/.test(flags);
  };
  const matchesWrite = (p) => writeRe !== null && writeRe.test(text(p));
  const matchesRead = (p) => readRe !== null && readRe.test(text(p));

  /** Bytes written so far per tracked file descriptor / handle. */
  const tracked = new Map();
  const lengthOf = (data, offset, length) => {
    if (typeof data === 'string') return Buffer.byteLength(data);
    if (typeof length === 'number') return length;
    return data.byteLength - (typeof offset === 'number' ? offset : 0);
  };
  /** How many of n bytes may still be written to a tracked target; throws when none may. */
  const allowance = (t, n) => {
    const left = Math.max(0, afterBytes - t.written);
    if (left >= n) {
      t.written += n;
      return n;
    }
    return left;
  };

  /** Paths of the descriptors whose sync fails. */
  const failingSyncs = new Map();
  const { openSync, writeSync, closeSync, accessSync, fsync, fsyncSync } = fs;
  fs.openSync = function (p, flags, mode) {
    if (matchesRead(p) && !forWrite(flags)) throw fault('open', p);
    const fd = openSync.call(this, p, flags, mode);
    if (forWrite(flags) && matchesWrite(p)) tracked.set(fd, { path: text(p), written: 0 });
    if (forWrite(flags) && syncRe !== null && syncRe.test(text(p))) failingSyncs.set(fd, text(p));
    return fd;
  };
  fs.fsyncSync = function (fd) {
    if (failingSyncs.has(fd)) throw fault('fsync');
    return fsyncSync.call(this, fd);
  };
  fs.fsync = function (fd, callback) {
    if (failingSyncs.has(fd)) {
      const e = fault('fsync');
      setImmediate(() => callback(e));
      return;
    }
    return fsync.call(this, fd, callback);
  };
  fs.writeSync = function (fd, data, offset, length, position) {
    const t = tracked.get(fd);
    if (t) {
      const n = lengthOf(data, offset, length);
      const ok = allowance(t, n);
      if (ok < n) {
        if (ok > 0 && typeof data !== 'string') writeSync.call(this, fd, data, typeof offset === 'number' ? offset : 0, ok);
        t.written += ok;
        throw fault('write');
      }
    }
    return writeSync.call(this, fd, data, offset, length, position);
  };
  fs.closeSync = function (fd) {
    tracked.delete(fd);
    failingSyncs.delete(fd);
    return closeSync.call(this, fd);
  };
  fs.accessSync = function (p, mode) {
    if (matchesRead(p)) throw fault('access', p);
    return accessSync.call(this, p, mode);
  };

  const fsp = fs.promises;
  const { writeFile, open, access, link, symlink, copyFile, rename, mkdir } = fsp;
  fsp.writeFile = async function (p, data, options) {
    if (typeof p !== 'object' && matchesWrite(p)) {
      const bytes = typeof data === 'string' ? Buffer.from(data) : Buffer.from(data.buffer, data.byteOffset, data.byteLength);
      await writeFile.call(this, p, bytes.subarray(0, Math.min(afterBytes, bytes.length)), options);
      if (bytes.length > afterBytes) throw fault('write', p);
      return;
    }
    return writeFile.call(this, p, data, options);
  };
  fsp.open = async function (p, flags, mode) {
    if (matchesRead(p) && !forWrite(flags)) throw fault('open', p);
    const handle = await open.call(this, p, flags, mode);
    if (forWrite(flags) && matchesWrite(p)) tracked.set(handle, { path: text(p), written: 0 });
    return handle;
  };
  fsp.access = async function (p, mode) {
    if (matchesRead(p)) throw fault('access', p);
    return access.call(this, p, mode);
  };
  for (const [name, original, syscall] of [
    ['link', link, 'link'],
    ['symlink', symlink, 'symlink'],
    ['copyFile', copyFile, 'copyfile'],
    ['rename', rename, 'rename'],
  ]) {
    fsp[name] = async function (from, to, ...rest) {
      if (matchesWrite(to)) throw fault(syscall, to);
      return original.call(this, from, to, ...rest);
    };
  }
  fsp.mkdir = async function (p, options) {
    if (matchesWrite(p)) throw fault('mkdir', p);
    return mkdir.call(this, p, options);
  };

  // FileHandle writes (the lock file, and any writer using handles)
  const probe = await open.call(fsp, new URL(import.meta.url), 'r');
  const proto = Object.getPrototypeOf(probe);
  await probe.close();
  const { write: handleWrite, writeFile: handleWriteFile } = proto;
  proto.write = async function (data, ...rest) {
    const t = tracked.get(this);
    if (t) {
      const n = lengthOf(data, rest[0], rest[1]);
      if (allowance(t, n) < n) throw fault('write', t.path);
    }
    return handleWrite.call(this, data, ...rest);
  };
  proto.writeFile = async function (data, options) {
    const t = tracked.get(this);
    if (t) {
      const n = lengthOf(data);
      if (allowance(t, n) < n) throw fault('write', t.path);
    }
    return handleWriteFile.call(this, data, options);
  };

  syncBuiltinESMExports();
}
