// Reads a NetCDF file's dimensions, variables and attributes into one small shape, whatever its
// format: classic and 64-bit-offset NetCDF through netcdfjs, NetCDF-4 (an HDF5 file) through h5wasm.
import { randomUUID } from 'node:crypto';
import * as h5wasm from 'h5wasm/node';
import { NetCDFReader } from 'netcdfjs';

export type AttributeValue = string | number | number[];

export interface NetcdfVariable {
  name: string;
  /** Dimension names, slowest first; a char variable's string-length dimension is left out. */
  dimensions: string[];
  attributes: Record<string, AttributeValue>;
}

export interface NetcdfDataset {
  format: 'classic' | 'netcdf4';
  dimensions: Record<string, number>;
  variables: NetcdfVariable[];
  /** A variable's values, flat in row-major order (strings for text variables). */
  read(v: NetcdfVariable): (number | string)[];
}

const HDF5_SIGNATURE = [0x89, 0x48, 0x44, 0x46, 0x0d, 0x0a, 0x1a, 0x0a];

export async function readNetcdf(bytes: Uint8Array): Promise<NetcdfDataset> {
  if (bytes.length >= 4 && bytes[0] === 0x43 && bytes[1] === 0x44 && bytes[2] === 0x46) return readClassic(bytes);
  if (HDF5_SIGNATURE.every((b, i) => bytes[i] === b)) return readNetcdf4(bytes);
  throw new Error('the body starts with neither the classic NetCDF signature (CDF) nor the HDF5 one (NetCDF-4)');
}

function plain(value: unknown): AttributeValue {
  if (typeof value === 'string' || typeof value === 'number') return value;
  if (typeof value === 'bigint') return Number(value);
  if (ArrayBuffer.isView(value) || Array.isArray(value)) {
    const list = Array.from(value as ArrayLike<unknown>, (x) => (typeof x === 'bigint' ? Number(x) : x));
    if (list.every((x) => typeof x === 'number')) return list.length === 1 ? (list[0] as number) : (list as number[]);
    return list.map(String).join('');
  }
  return String(value);
}

function readClassic(bytes: Uint8Array): NetcdfDataset {
  const reader = new NetCDFReader(bytes);
  const dims = reader.dimensions;
  const dimensions = Object.fromEntries(dims.map((d) => [d.name, d.size]));
  const raw = reader.variables;
  const variables = raw.map((v) => {
    const names = v.dimensions.map((i) => dims[i].name);
    const attrs = v.attributes as unknown as { name: string; value: unknown }[];
    return {
      name: v.name,
      dimensions: v.type === 'char' ? names.slice(0, -1) : names,
      attributes: Object.fromEntries(attrs.map((a) => [a.name, plain(a.value)])),
    };
  });
  return {
    format: 'classic',
    dimensions,
    variables,
    read(v) {
      const r = raw.find((x) => x.name === v.name)!;
      const data = reader.getDataVariable(r).flat();
      if (r.type !== 'char') return data.map((x) => (typeof x === 'bigint' ? Number(x) : x)) as (number | string)[];
      // Text: one string per row of the last (string-length) dimension, without its padding.
      const width = r.dimensions.length ? dims[r.dimensions[r.dimensions.length - 1]].size : data.length;
      const rows = v.dimensions.reduce((n, d) => n * dimensions[d], 1);
      return Array.from({ length: rows }, (_, i) => data.slice(i * width, (i + 1) * width).join('').replace(/\0+$/, '').trim());
    },
  };
}

async function readNetcdf4(bytes: Uint8Array): Promise<NetcdfDataset> {
  const { FS } = await h5wasm.ready;
  // h5wasm opens files by name in its in-memory file system: one name per request, removed at once.
  const path = `/run-${randomUUID()}.nc`;
  FS.writeFile(path, bytes);
  let file: h5wasm.File | null = null;
  try {
    file = new h5wasm.File(path, 'r');
    const f = file;
    const datasets = f.keys().map((k) => ({ name: k, item: f.get(k) })).filter((x): x is { name: string; item: h5wasm.Dataset } => x.item instanceof h5wasm.Dataset);
    const attrsOf = (d: h5wasm.Dataset) => Object.fromEntries(Object.entries(d.attrs).flatMap(([k, a]) => (k === 'DIMENSION_LIST' || k === 'REFERENCE_LIST' ? [] : [[k, plain(a.value)]])));
    // Dimensions are the datasets marked as dimension scales, with their netCDF dimension ids.
    const dimensions: Record<string, number> = {};
    const byDimId = new Map<number, string>();
    for (const { name, item } of datasets) {
      const a = item.attrs;
      if (a.CLASS && String(a.CLASS.value) === 'DIMENSION_SCALE') {
        dimensions[name] = item.shape?.[0] ?? 0;
        const id = a._Netcdf4Dimid ? Number(plain(a._Netcdf4Dimid.value)) : NaN;
        if (Number.isFinite(id)) byDimId.set(id, name);
      }
    }
    const dimsOf = (name: string, d: h5wasm.Dataset): string[] => {
      const coords = d.attrs._Netcdf4Coordinates ? plain(d.attrs._Netcdf4Coordinates.value) : null;
      if (coords !== null && typeof coords !== 'string') return [coords].flat().map((id) => byDimId.get(id) ?? `dim${id}`);
      const list = d.attrs.DIMENSION_LIST?.value as unknown[][] | undefined;
      if (list) return list.map((refs) => (f.dereference(refs[0] as h5wasm.Reference) as unknown as { path?: string } | null)?.path?.replace(/^\//, '') ?? '?');
      return name in dimensions ? [name] : [];
    };
    const variables: NetcdfVariable[] = [];
    const values = new Map<string, (number | string)[]>();
    for (const { name, item } of datasets) {
      const isDimensionOnly = item.attrs.NAME && String(item.attrs.NAME.value).startsWith('This is a netCDF dimension but not a netCDF variable');
      if (isDimensionOnly) continue;
      variables.push({ name, dimensions: dimsOf(name, item), attributes: attrsOf(item) });
      const v = item.value;
      values.set(name, (ArrayBuffer.isView(v) || Array.isArray(v) ? Array.from(v as ArrayLike<unknown>) : [v]).map((x) => (typeof x === 'bigint' ? Number(x) : typeof x === 'number' ? x : String(x))));
    }
    return { format: 'netcdf4', dimensions, variables, read: (v) => values.get(v.name) ?? [] };
  } finally {
    file?.close();
    FS.unlink(path);
  }
}
