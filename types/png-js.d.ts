/** The PNG decoder pdfkit uses (png-js 2), as the report tests read it: width, height and decoded RGBA pixels. */
declare module "png-js" {
  export default class PNG {
    constructor(data: Buffer);
    width: number;
    height: number;
    decode(callback: (pixels: Buffer) => void): void;
  }
}
