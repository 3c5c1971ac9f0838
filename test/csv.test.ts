import { describe, expect, it } from "vitest";
import { ExitCode, RbfieldError } from "../src/errors.ts";
import { csvField, estimatesCsv, formatNumber } from "../src/write/csv.ts";
import type { PointTable } from "../src/types.ts";

describe("formatNumber", () => {
  it("writes up to 10 significant digits by default, trailing zeros trimmed", () => {
    expect(formatNumber(0)).toBe("0");
    expect(formatNumber(-0)).toBe("0");
    expect(formatNumber(1.5)).toBe("1.5");
    expect(formatNumber(100)).toBe("100");
    expect(formatNumber(-2.5e-3)).toBe("-0.0025");
    expect(formatNumber(1 / 3)).toBe("0.3333333333");
    expect(formatNumber(0.1 + 0.2)).toBe("0.3");
    expect(formatNumber(123456.78901234)).toBe("123456.789");
    expect(formatNumber(6000123.456789)).toBe("6000123.457");
  });

  it("honours digits", () => {
    expect(formatNumber(2 / 3, 3)).toBe("0.667");
    expect(formatNumber(2.5, 1)).toBe("3");
    expect(formatNumber(1234.5, 2)).toBe("1200");
    expect(formatNumber(0.1 + 0.2, 17)).toBe("0.30000000000000004");
  });

  it("never uses exponent form for |v| in [1e-6, 1e15)", () => {
    expect(formatNumber(123456789012)).toBe("123456789000");
    expect(formatNumber(999999999999999, 15)).toBe("999999999999999");
    expect(formatNumber(-123456789012345, 15)).toBe("-123456789012345");
    expect(formatNumber(1e-6)).toBe("0.000001");
    expect(formatNumber(-1.234567e-6)).toBe("-0.000001234567");
    expect(formatNumber(1e14)).toBe("100000000000000");
  });

  it("writes NaN and infinities as empty text", () => {
    expect(formatNumber(NaN)).toBe("");
    expect(formatNumber(Infinity)).toBe("");
    expect(formatNumber(-Infinity)).toBe("");
  });
});

describe("csvField (RFC 4180 §2.6, §2.7)", () => {
  it("quotes only when needed and doubles quotes", () => {
    expect(csvField("plain text")).toBe("plain text");
    expect(csvField("")).toBe("");
    expect(csvField("a,b")).toBe('"a,b"');
    expect(csvField('say "hi"')).toBe('"say ""hi"""');
    expect(csvField("two\nlines")).toBe('"two\nlines"');
    expect(csvField("cr\ronly")).toBe('"cr\ronly"');
    expect(csvField("semi;colon")).toBe("semi;colon");
  });
});

describe("estimatesCsv", () => {
  const table: PointTable = {
    file: "in.csv",
    columns: ["name", "x", "y", "value, ppm"],
    rows: [
      ["Smith, J", "1,5", "2", "3"],
      ['say "hi"', "4", " 5 ", ""],
      ["two\nlines", "7", "8", "abc"],
    ],
    lines: [2, 3, 4],
    xColumn: 1,
    yColumn: 2,
    zColumn: 3,
    columnChoice: "detected",
    delimiter: ";",
    decimalComma: true,
  };

  it("keeps every input column as text and adds formatted columns, CRLF records (RFC 4180 §2.1–2.7)", () => {
    const csv = estimatesCsv(table, [
      { name: "estimate", values: new Float64Array([1.5, NaN, 1 / 3]) },
      { name: "std error", values: [0.123456, 2, 1e-7], digits: 3 },
    ]);
    expect(csv).toBe(
      'name,x,y,"value, ppm",estimate,std error\r\n' +
        '"Smith, J","1,5",2,3,1.5,0.123\r\n' +
        '"say ""hi""",4, 5 ,,,2\r\n' +
        '"two\nlines",7,8,abc,0.3333333333,1e-7\r\n',
    );
  });

  it("writes the header alone for a table with no rows", () => {
    expect(estimatesCsv({ ...table, rows: [], lines: [] }, [{ name: "z", values: [] }])).toBe(
      'name,x,y,"value, ppm",z\r\n',
    );
  });

  it("pads short rows with empty fields", () => {
    const csv = estimatesCsv({ ...table, rows: [["a"]], lines: [2] }, []);
    expect(csv).toBe('name,x,y,"value, ppm"\r\na,,,\r\n');
  });

  it("refuses an added column of the wrong length as an internal error", () => {
    let caught: unknown;
    try {
      estimatesCsv(table, [{ name: "estimate", values: [1, 2] }]);
    } catch (e) {
      caught = e;
    }
    expect(caught).toBeInstanceOf(RbfieldError);
    expect((caught as RbfieldError).exitCode).toBe(ExitCode.internal);
  });
});
