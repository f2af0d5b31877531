// Routes, one view each. `meta.roles` says which console roles may open a route (the same roles the
// API grants the operations behind it); a person opens it when any one of their roles is among
// them; the guard sends everyone else to sign-in or to their home.
import { createRouter, createWebHistory, type RouteRecordRaw } from 'vue-router';
import { homeFor, mayOpen, NAV_ITEMS, type Role } from '../lib/navigation';
import { useSessionStore } from '../stores/session';
import { onUnauthorised } from '../api/client';

declare module 'vue-router' {
  interface RouteMeta {
    public?: boolean;
    roles?: readonly Role[];
    /** The navigation item this route belongs to (detail pages under a list). */
    section?: string;
    title?: string;
  }
}

const rolesOf = (name: string): readonly Role[] => NAV_ITEMS.find((i) => i.name === name)?.roles ?? [];

export const routes: RouteRecordRaw[] = [
  { path: '/sign-in', name: 'sign-in', component: () => import('../views/SignInView.vue'), meta: { public: true, title: 'Sign in' } },
  { path: '/accept-invite', name: 'accept-invite', component: () => import('../views/AcceptInviteView.vue'), meta: { public: true, title: 'Join your organisation' } },
  { path: '/reset-password', name: 'reset-password', component: () => import('../views/ResetPasswordView.vue'), meta: { public: true, title: 'Reset password' } },
  { path: '/dev/mailbox', name: 'mailbox', component: () => import('../views/MailboxView.vue'), meta: { public: true, title: 'Development mailbox' } },
  { path: '/', name: 'home', component: { render: () => null }, meta: { roles: ['admin', 'quality', 'auditor'] } },
  { path: '/verdicts', name: 'verdicts', component: () => import('../views/VerdictsView.vue'), meta: { roles: rolesOf('verdicts'), title: 'Verdicts' } },
  { path: '/verdicts/:id', name: 'verdict', component: () => import('../views/VerdictView.vue'), props: true, meta: { roles: rolesOf('verdicts'), section: 'verdicts', title: 'Verdict' } },
  { path: '/lots/new', name: 'lot-new', component: () => import('../views/LotSubmitView.vue'), meta: { roles: rolesOf('lot-new'), title: 'Submit a lot' } },
  { path: '/products', name: 'products', component: () => import('../views/ProductsView.vue'), meta: { roles: rolesOf('products'), title: 'Products' } },
  { path: '/products/new', name: 'product-new', component: () => import('../views/ProductFormView.vue'), meta: { roles: rolesOf('products'), section: 'products', title: 'New product' } },
  { path: '/products/:id', name: 'product-edit', component: () => import('../views/ProductFormView.vue'), props: true, meta: { roles: rolesOf('products'), section: 'products', title: 'Edit product' } },
  { path: '/audit/lookup', name: 'audit-lookup', component: () => import('../views/AuditLookupView.vue'), meta: { roles: rolesOf('audit-lookup'), title: 'Seal lookup' } },
  { path: '/verify/:seal', name: 'verify', component: () => import('../views/AuditLookupView.vue'), props: true, meta: { roles: rolesOf('audit-lookup'), section: 'audit-lookup', title: 'Seal lookup' } },
  { path: '/ledger', name: 'ledger', component: () => import('../views/LedgerView.vue'), meta: { roles: rolesOf('ledger'), title: 'Ledger' } },
  { path: '/audit-trail', name: 'audit-trail', component: () => import('../views/AuditTrailView.vue'), meta: { roles: rolesOf('audit-trail'), title: 'Audit trail' } },
  { path: '/admin/users', name: 'users', component: () => import('../views/UsersView.vue'), meta: { roles: rolesOf('users'), title: 'Users' } },
  { path: '/admin/keys', name: 'keys', component: () => import('../views/KeysView.vue'), meta: { roles: rolesOf('keys'), title: 'API keys' } },
  { path: '/admin/usage', name: 'usage', component: () => import('../views/UsageView.vue'), meta: { roles: rolesOf('usage'), title: 'Usage' } },
  { path: '/admin/webhooks', name: 'webhooks', component: () => import('../views/WebhooksView.vue'), meta: { roles: rolesOf('webhooks'), title: 'Webhooks' } },
  { path: '/:rest(.*)*', name: 'not-found', component: () => import('../views/NotFoundView.vue'), meta: { public: true, title: 'Not found' } },
];

const router = createRouter({ history: createWebHistory('/'), routes });

router.beforeEach(async (to) => {
  const session = useSessionStore();
  if (!session.checked) {
    try {
      await session.load();
    } catch {
      // The service is unreachable: public pages still open; guarded ones go to sign-in, which says so.
    }
  }
  if (to.meta.public) return true;
  if (!session.signedIn) return { name: 'sign-in', query: to.fullPath !== '/' ? { next: to.fullPath } : {} };
  if (to.name === 'home' || !mayOpen(to.meta.roles ?? [], session.roles)) return { name: homeFor(session.roles) };
  return true;
});

// A call that comes back 401 means the session has ended (signed out elsewhere, revoked, or idle
// too long): the page goes to sign-in, which says so and comes back here afterwards.
onUnauthorised(() => {
  const here = router.currentRoute.value;
  if (here.meta.public) return;
  void router.push({ name: 'sign-in', query: { next: here.fullPath, ended: '1' } });
});

router.afterEach((to) => {
  document.title = to.meta.title ? `${to.meta.title} · Lotproof` : 'Lotproof';
});

export default router;
